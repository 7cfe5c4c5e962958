package server

import (
	"encoding/json"
	"net/http"
	"net/http/httptest"
	"strings"
	"testing"

	"github.com/labstack/echo/v4"

	"tagtally/capture"
	"tagtally/server/access"
)

// TestBadInputAcrossTheAPI sends malformed, mistyped, oversized, unknown,
// over-long and non-UTF-8 input to the API's JSON endpoints, and path
// traversal to the static files: each gets the right 4xx with a clear
// message, and nothing is written (no record, no token).
func TestBadInputAcrossTheAPI(t *testing.T) {
	ts := newTestServer(t, func(c *Config) { c.MaxBodyBytes = 64 << 10 })
	ts.srv.Access().Attempt = access.NewLimiter(access.Limits{PerClient: 1 << 20, Overall: 1 << 20, Window: 60e9})
	caps := "/api/v1/studies/" + ts.study.ID + "/captures"
	long := strings.Repeat("x", 20000)
	tests := []struct {
		name, method, path, body string
		status                   int
		field, says              string
	}{
		{"capture: malformed JSON", "POST", caps, `{"tag_id":`, 400, "", "ends too early"},
		{"capture: invalid UTF-8 in notes", "POST", caps, strings.Replace(validCapture, `"observer"`, "\"notes\":\"bad \xff\xfe byte\",\"observer\"", 1), 400, "", "UTF-8"},
		{"capture: over-long tag", "POST", caps, strings.Replace(validCapture, `"BF-0001"`, `"`+long+`"`, 1), 422, "tag_id", "longer"},
		{"capture: over-long notes", "POST", caps, strings.Replace(validCapture, `"observer"`, `"notes":"`+long+`","observer"`, 1), 422, "notes", "longer"},
		{"capture: body over the limit", "POST", caps, `{"notes":"` + strings.Repeat("y", 70<<10) + `"}`, 413, "", "limit"},
		{"capture: JSON array", "POST", caps, `[1,2]`, 400, "", "must be"},
		{"join: malformed JSON", "POST", "/api/v1/join", `{"code":"AB`, 400, "", "JSON"},
		{"join: wrong type", "POST", "/api/v1/join", `{"code":12,"device":"p"}`, 400, "code", "string"},
		{"join: unknown field", "POST", "/api/v1/join", `{"code":"X","device":"p","role":"coordinator"}`, 400, "role", "unknown field"},
		{"join: no device name", "POST", "/api/v1/join", `{"code":"AAAA-BBBB-CCCC"}`, 400, "device", "name this phone"},
		{"join: invalid UTF-8 device", "POST", "/api/v1/join", "{\"code\":\"AAAA-BBBB-CCCC\",\"device\":\"\xc3\x28\"}", 400, "", "UTF-8"},
		{"join: very long code", "POST", "/api/v1/join", `{"code":"` + strings.Repeat("A", 3000) + `","device":"p"}`, 401, "", "code does not work"},
		{"join: body over the join limit", "POST", "/api/v1/join", `{"code":"` + long + `","device":"p"}`, 413, "", "4096"},
		{"join: control characters in code", "POST", "/api/v1/join", `{"code":"AAAA\u0000BBBB","device":"p"}`, 401, "", "code does not work"},
		{"join: body over the limit", "POST", "/api/v1/join", `{"code":"` + strings.Repeat("z", 70<<10) + `","device":"p"}`, 413, "", "limit"},
		{"claim: empty body", "POST", "/api/v1/access/claim", ``, 400, "", "empty"},
		{"claim: two values", "POST", "/api/v1/access/claim", `{"code":"a"}{}`, 400, "", "exactly one"},
		{"claim: wrong code", "POST", "/api/v1/access/claim", `{"code":"` + strings.Repeat("A", 43) + `"}`, 401, "", "code does not work"},
		{"claim: label too long", "POST", "/api/v1/access/claim", `{"code":"c","label":"` + strings.Repeat("x", 3000) + `"}`, 401, "", "code does not work"},
		{"token: wrong type", "POST", "/api/v1/access/tokens", `{"kind":"peer","studies":"fen"}`, 400, "studies", "array"},
		{"token: unknown kind", "POST", "/api/v1/access/tokens", `{"kind":"root"}`, 400, "kind", "peer"},
		{"token: label too long", "POST", "/api/v1/access/tokens", `{"kind":"coordinator","label":"` + long + `"}`, 422, "", "longer"},
		{"token: label with a control character", "POST", "/api/v1/access/tokens", `{"kind":"coordinator","label":"a\u0007b"}`, 422, "", "control"},
		{"join code: unknown field", "POST", "/api/v1/studies/" + ts.study.ID + "/join-codes", `{"role":"viewer","ttl":"1y"}`, 400, "ttl", "unknown field"},
		{"join code: wrong content type", "POST", "/api/v1/studies/" + ts.study.ID + "/join-codes", "role=viewer", 400, "", "JSON"},
		{"audit: bad limit", "GET", "/api/v1/access/audit?limit=-1", "", 400, "limit", "whole number"},
		{"audit: bad before", "GET", "/api/v1/access/audit?before=yesterday", "", 400, "before", "seq"},
		{"traversal: dot dot", "GET", "/../go.mod", "", 404, "", ""},
		{"traversal: encoded dots", "GET", "/%2e%2e/%2e%2e/etc/passwd", "", 404, "", ""},
		{"traversal: encoded slash", "GET", "/coord/..%2f..%2fgo.mod", "", 404, "", ""},
		{"traversal: into the source", "GET", "/js/../../server/server.go", "", 404, "", ""},
		{"traversal: study parameter", "GET", "/api/v1/studies/..%2f..%2fbackup", "", 404, "", ""},
		{"traversal: backslashes", "GET", "/..\\..\\go.mod", "", 404, "", ""},
	}
	tokens := func() int {
		l, err := ts.srv.Access().Tokens()
		if err != nil {
			t.Fatal(err)
		}
		return len(l)
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			beforeCaps, beforeTokens := ts.count(t), tokens()
			req, err := http.NewRequest(tc.method, ts.URL+tc.path, strings.NewReader(tc.body))
			if err != nil {
				// Some paths are refused by the client itself; send raw.
				req = httptest.NewRequest(tc.method, tc.path, strings.NewReader(tc.body))
				req.Header.Set("Authorization", "Bearer "+ts.token)
				rec := httptest.NewRecorder()
				ts.srv.Handler().ServeHTTP(rec, req)
				if rec.Code != tc.status {
					t.Fatalf("%s %s = %d %s, want %d", tc.method, tc.path, rec.Code, rec.Body, tc.status)
				}
				return
			}
			if strings.HasPrefix(tc.body, "{") || strings.HasPrefix(tc.body, "[") {
				req.Header.Set("Content-Type", "application/json")
			} else if tc.body != "" {
				req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
			}
			req.URL.Opaque = "" // send the path as written
			resp, err := ts.Client().Do(req)
			if err != nil {
				t.Fatal(err)
			}
			raw := make([]byte, 4096)
			n, _ := resp.Body.Read(raw)
			resp.Body.Close()
			raw = raw[:n]
			if resp.StatusCode != tc.status {
				t.Fatalf("%s %.80s = %d %s, want %d", tc.method, tc.path, resp.StatusCode, raw, tc.status)
			}
			if strings.Contains(string(raw), "package ") || strings.Contains(string(raw), "root:") {
				t.Errorf("answer leaks a file: %.200s", raw)
			}
			if !strings.HasPrefix(tc.path, "/api/") {
				return // static files answer 404 in plain text
			}
			e := answer{status: resp.StatusCode, raw: raw}.errorBody(t)
			if e.Field != tc.field {
				t.Errorf("error names field %q, want %q (%s)", e.Field, tc.field, e.Error)
			}
			if !strings.Contains(e.Error, tc.says) {
				t.Errorf("error %q does not say %q", e.Error, tc.says)
			}
			if ts.count(t) != beforeCaps || tokens() != beforeTokens {
				t.Errorf("a refused request wrote something: records %d -> %d, tokens %d -> %d", beforeCaps, ts.count(t), beforeTokens, tokens())
			}
		})
	}
}

// bindTargets are the request bodies bindJSON decodes into, for the fuzz
// target: every JSON body the API reads through it.
func bindTargets() []func() any {
	return []func() any{
		func() any { return new(capture.Capture) },
		func() any { return new(capture.Study) },
		func() any { return new(joinRequest) },
		func() any { return new(claimRequest) },
		func() any { return new(newTokenRequest) },
		func() any { return new(joinCodeRequest) },
		func() any { return new(resolveRequest) },
		func() any { return new(peerRequest) },
	}
}

// FuzzBindJSON: bindJSON never panics, and every failure is a 4xx with a
// message (request data never becomes a 500).
func FuzzBindJSON(f *testing.F) {
	for _, s := range []string{
		validCapture, `{}`, `[]`, `null`, `{"code":"AAAA-BBBB-CCCC","device":"crew 2"}`, `{"code":12}`,
		`{"kind":"peer","label":"office","studies":["fen-grid-2025"]}`, `{"role":"recorder"}`, `{"leaves":["a"],"capture":null}`,
		"{\"device\":\"\xff\"}", `{"a":1}{}`, `{"tag_id":"` + strings.Repeat("x", 300) + `"}`, `{"mass_g":1e999}`, `{"id":"\ud800"}`, "",
	} {
		f.Add([]byte(s), uint8(0))
	}
	e := echo.New()
	f.Fuzz(func(t *testing.T, body []byte, which uint8) {
		targets := bindTargets()
		v := targets[int(which)%len(targets)]()
		req := httptest.NewRequest("POST", "/", strings.NewReader(string(body)))
		req.Header.Set("Content-Type", "application/json")
		rec := httptest.NewRecorder()
		req.Body = http.MaxBytesReader(rec, req.Body, 1<<16)
		err := bindJSON(e.NewContext(req, rec), v)
		if err == nil {
			return
		}
		code, eb := status(err)
		if code < 400 || code >= 500 || eb.Error == "" {
			t.Fatalf("bindJSON(%q) failed with %d %q: %v", body, code, eb.Error, err)
		}
	})
}

// FuzzJoinAndClaim sends arbitrary bodies to the join and claim endpoints
// of a server that has a live join code: nothing panics, nothing is a
// 5xx, and no body that does not hold the code gets a token.
func FuzzJoinAndClaim(f *testing.F) {
	for _, s := range []string{`{"code":"AAAA-BBBB-CCCC","device":"crew 2"}`, `{"code":"","device":""}`, `{"code":null}`,
		`{"code":"` + strings.Repeat("A", 43) + `"}`, "{\"code\":\"\xff\xff\",\"device\":\"x\"}", `{"code":"0000 0000 0000","device":"p"}`, `[`} {
		f.Add([]byte(s), false)
	}
	ts := newTestServer(f, nil)
	ts.srv.Access().Attempt = access.NewLimiter(access.Limits{PerClient: 1 << 30, Overall: 1 << 30, Window: 60e9})
	jc, err := ts.srv.Access().NewJoinCode(ts.study.ID, access.Recorder, "fuzz")
	if err != nil {
		f.Fatal(err)
	}
	f.Fuzz(func(t *testing.T, body []byte, claim bool) {
		path := "/api/v1/join"
		if claim {
			path = "/api/v1/access/claim"
		}
		req := httptest.NewRequest("POST", path, strings.NewReader(string(body)))
		req.Header.Set("Content-Type", "application/json")
		rec := httptest.NewRecorder()
		ts.srv.Handler().ServeHTTP(rec, req)
		if rec.Code >= 500 {
			t.Fatalf("%s %q = %d %s", path, body, rec.Code, rec.Body)
		}
		if rec.Code < 300 {
			// Only the live join code may give a token; no claim code exists.
			var jr joinRequest
			_ = json.Unmarshal(body, &jr)
			if claim || access.NormaliseJoinCode(jr.Code) != access.NormaliseJoinCode(jc.Code) {
				t.Fatalf("%s %q got a token without the code: %d %s", path, body, rec.Code, rec.Body)
			}
		}
	})
}
