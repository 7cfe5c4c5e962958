package server

import (
	"errors"
	"net/http"
	"net/http/httptest"
	"slices"
	"strings"
	"testing"
	"time"

	"tagtally/capture/storetest"
	"tagtally/server/access"
)

// who may use each route, written out by hand here (not read from the
// route table): c coordinator, r recorder, v viewer, p peer, * anyone
// without a token. A route missing here fails the test, so a new route
// cannot arrive without someone deciding who may use it.
var expectedAccess = map[string]string{
	"GET /healthz":                                     "*",
	"GET /api/v1":                                      "*",
	"GET /api/v1/studies":                              "crv",
	"POST /api/v1/studies":                             "c",
	"GET /api/v1/studies/:study":                       "crv",
	"PUT /api/v1/studies/:study":                       "c",
	"GET /api/v1/studies/:study/occasions":             "crv",
	"POST /api/v1/studies/:study/occasions":            "c",
	"PUT /api/v1/studies/:study/occasions":             "c",
	"GET /api/v1/studies/:study/stations":              "crv",
	"POST /api/v1/studies/:study/stations":             "c",
	"PUT /api/v1/studies/:study/stations":              "c",
	"GET /api/v1/studies/:study/checks":                "crv",
	"GET /api/v1/studies/:study/estimates":             "crv",
	"GET /api/v1/studies/:study/summary":               "crv",
	"GET /api/v1/studies/:study/devices":               "crv",
	"GET /api/v1/studies/:study/conflicts":             "crv",
	"GET /api/v1/studies/:study/captures":              "crv",
	"POST /api/v1/studies/:study/captures":             "cr",
	"GET /api/v1/studies/:study/captures/:id":          "crv",
	"PUT /api/v1/studies/:study/captures/:id":          "cr",
	"DELETE /api/v1/studies/:study/captures/:id":       "cr",
	"GET /api/v1/studies/:study/captures/:id/history":  "crv",
	"POST /api/v1/studies/:study/captures/:id/resolve": "c",
	"GET /api/v1/sync":                                 "crvp",
	"POST /api/v1/sync/push":                           "crp",
	"GET /api/v1/sync/pull":                            "crvp",
	"POST /api/v1/sync/peer":                           "c",
	"GET /api/v1/studies/:study/export.xlsx":           "cv",
	"GET /api/v1/studies/:study/export/:table":         "cv",
	"POST /api/v1/studies/:study/import":               "c",
	"POST /api/v1/access/claim":                        "*",
	"POST /api/v1/join":                                "*",
	"GET /api/v1/access/me":                            "crvp",
	"POST /api/v1/access/sign-out":                     "crvp",
	"GET /api/v1/access/tokens":                        "c",
	"POST /api/v1/access/tokens":                       "c",
	"POST /api/v1/access/tokens/:id/revoke":            "c",
	"POST /api/v1/studies/:study/join-codes":           "c",
	"POST /api/v1/access/claim-link":                   "c",
	"GET /api/v1/access/audit":                         "c",
	"GET /api/v1/backup":                               "c",
	"GET /*":                                           "*",
}

// roleCase makes a fresh token for one request (a sign-out or a revoke
// must not spoil the next case); "" sends none. cookie sends it as a
// session cookie with its CSRF header.
type roleCase struct {
	name   string
	letter byte // the role's letter in expectedAccess; 0 for none
	make   func(t *testing.T, ts *testServer) (secret, csrf string)
	cookie bool
	// studyOnly: the token reaches only another study, so study routes
	// are refused even when the role would be allowed.
	otherStudy bool
	revoked    bool
}

const otherStudyID = "other-study"

func roleCases() []roleCase {
	device := func(role access.Role, study string) func(t *testing.T, ts *testServer) (string, string) {
		return func(t *testing.T, ts *testServer) (string, string) {
			s, _ := issue(t, ts.srv, access.NewToken{Kind: access.KindDevice, Role: role, Studies: []string{study}, Label: "phone"})
			return s, ""
		}
	}
	return []roleCase{
		{name: "none", make: func(*testing.T, *testServer) (string, string) { return "", "" }},
		{name: "coordinator", letter: 'c', make: func(t *testing.T, ts *testServer) (string, string) {
			s, _ := issue(t, ts.srv, access.NewToken{Kind: access.KindCoordinator, Label: "script"})
			return s, ""
		}},
		{name: "coordinator session", letter: 'c', cookie: true, make: func(t *testing.T, ts *testServer) (string, string) {
			s, tok := issue(t, ts.srv, access.NewToken{Kind: access.KindSession, Label: "browser"})
			return s, tok.CSRF
		}},
		{name: "recorder", letter: 'r', make: device(access.Recorder, "fen-grid-2025")},
		{name: "viewer", letter: 'v', make: device(access.Viewer, "fen-grid-2025")},
		{name: "peer", letter: 'p', make: func(t *testing.T, ts *testServer) (string, string) {
			s, _ := issue(t, ts.srv, access.NewToken{Kind: access.KindPeer, Studies: []string{"fen-grid-2025"}, Label: "office"})
			return s, ""
		}},
		{name: "revoked recorder", letter: 'r', revoked: true, make: func(t *testing.T, ts *testServer) (string, string) {
			s, tok := issue(t, ts.srv, access.NewToken{Kind: access.KindDevice, Role: access.Recorder, Studies: []string{"fen-grid-2025"}, Label: "lost phone"})
			if _, err := ts.srv.Access().Revoke(tok.ID); err != nil {
				t.Fatal(err)
			}
			return s, ""
		}},
		{name: "recorder of another study", letter: 'r', otherStudy: true, make: device(access.Recorder, otherStudyID)},
		{name: "viewer of another study", letter: 'v', otherStudy: true, make: device(access.Viewer, otherStudyID)},
	}
}

// TestEveryRouteWithEveryRole walks every route of the table with every
// role and checks that the guard lets in exactly whom expectedAccess
// names. "Let in" means the handler answered (any status but 401 and
// 403); a refusal must be 401 without a valid token and 403 with one.
func TestEveryRouteWithEveryRole(t *testing.T) {
	ts := newTestServer(t, nil)
	ts.srv.Access().Attempt = access.NewLimiter(access.Limits{PerClient: 1 << 20, Overall: 1 << 20, Window: time.Minute})
	other := storetest.Study()
	other.ID, other.Name = otherStudyID, "Another grid"
	if err := ts.store.CreateStudy(other); err != nil {
		t.Fatal(err)
	}
	a := ts.do(t, "POST", "/api/v1/studies/"+ts.study.ID+"/captures", validCapture)
	var made captureAnswer
	a.decode(t, &made)
	if a.status != 201 {
		t.Fatalf("create = %d %s", a.status, a.raw)
	}
	fill := strings.NewReplacer(":study", ts.study.ID, ":id", made.Capture.ID, ":table", "captures.csv", "*", "index.html")

	seen := map[string]bool{}
	for _, r := range ts.srv.routes() {
		key := r.method + " " + r.path
		seen[key] = true
		want, ok := expectedAccess[key]
		if !ok {
			t.Errorf("route %s is not in expectedAccess: decide who may use it and add it there", key)
			continue
		}
		if r.need.name == "" {
			t.Errorf("route %s has no access rule", key)
		}
		path := fill.Replace(r.path)
		if strings.HasSuffix(r.path, "/:id/revoke") {
			path = "/api/v1/access/tokens/no-such-token/revoke"
		}
		for _, rc := range roleCases() {
			secret, csrf := rc.make(t, ts)
			allowed := want == "*" || (!rc.revoked && rc.letter != 0 && strings.IndexByte(want, rc.letter) >= 0)
			if rc.otherStudy && strings.Contains(r.path, ":study") && want != "*" {
				allowed = false
			}
			req, err := http.NewRequest(r.method, ts.URL+path, nil)
			if err != nil {
				t.Fatal(err)
			}
			switch {
			case secret == "":
			case rc.cookie:
				req.AddCookie(&http.Cookie{Name: SessionCookie, Value: secret})
				req.Header.Set(CSRFHeader, csrf)
			default:
				req.Header.Set("Authorization", "Bearer "+secret)
			}
			resp, err := http.DefaultClient.Do(req) // no coordinator token added
			if err != nil {
				t.Fatal(err)
			}
			resp.Body.Close()
			refused := resp.StatusCode == 401 || resp.StatusCode == 403
			if allowed == refused {
				t.Errorf("%s as %s: status %d, want %s", key, rc.name, resp.StatusCode, map[bool]string{true: "let in", false: "refused"}[allowed])
			}
			if refused {
				wantCode := 403
				if secret == "" || rc.revoked {
					wantCode = 401
				}
				if resp.StatusCode != wantCode {
					t.Errorf("%s as %s: refused with %d, want %d", key, rc.name, resp.StatusCode, wantCode)
				}
			}
		}
	}
	for key := range expectedAccess {
		if !seen[key] {
			t.Errorf("expectedAccess names %s, which is not a route", key)
		}
	}
}

// TestRouteWithoutRuleIsRefused: the server's own table passes the check
// New makes, and a table with a row that says nothing about access is
// refused.
func TestRouteWithoutRuleIsRefused(t *testing.T) {
	table := (&Server{}).routes()
	if err := checkRoutes(table); err != nil {
		t.Fatal(err)
	}
	bad := append(slices.Clone(table), route{method: http.MethodGet, path: "/api/v1/forgotten"})
	if err := checkRoutes(bad); !errors.Is(err, ErrConfig) || !strings.Contains(err.Error(), "/api/v1/forgotten") {
		t.Errorf("a route without an access rule: %v, want a config error naming it", err)
	}
}

// TestLocalRoutesNeedThisMachine: the backup and peer sync refuse a
// coordinator token from another address.
func TestLocalRoutesNeedThisMachine(t *testing.T) {
	ts := newTestServer(t, nil)
	for _, p := range []struct{ method, path string }{{"GET", "/api/v1/backup"}, {"POST", "/api/v1/sync/peer"}, {"POST", "/api/v1/access/claim-link"}} {
		req := httptest.NewRequest(p.method, p.path, strings.NewReader(`{"url":"http://127.0.0.1:1"}`))
		req.Header.Set("Authorization", "Bearer "+ts.token)
		req.Header.Set("Content-Type", "application/json")
		req.RemoteAddr = "192.0.2.7:50000"
		rec := httptest.NewRecorder()
		ts.srv.Handler().ServeHTTP(rec, req)
		if rec.Code != http.StatusForbidden || !strings.Contains(rec.Body.String(), "own machine") {
			t.Errorf("%s %s from another machine = %d %s, want 403", p.method, p.path, rec.Code, rec.Body)
		}
	}
}
