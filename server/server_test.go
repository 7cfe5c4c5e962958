package server

import (
	"bytes"
	"encoding/json"
	"io"
	"log/slog"
	"net/http"
	"net/http/httptest"
	"strings"
	"testing"

	"tagtally/capture"
	"tagtally/capture/storetest"
	"tagtally/server/access"
)

// testServer is an httptest server over a fresh store holding
// storetest.Study(), with the server's log captured in logs.
type testServer struct {
	*httptest.Server
	srv   *Server
	store *capture.Store
	study *capture.Study
	logs  *bytes.Buffer
	// token is a coordinator token; the server's Client() sends it.
	token string
}

func newTestServer(t testing.TB, edit func(*Config)) *testServer {
	t.Helper()
	store := storetest.Open(t)
	st := storetest.Study()
	if err := store.CreateStudy(st); err != nil {
		t.Fatal(err)
	}
	logs := new(bytes.Buffer)
	cfg := DefaultConfig()
	cfg.Logger = slog.New(slog.NewTextHandler(logs, nil))
	if edit != nil {
		edit(&cfg)
	}
	srv, err := New(store, cfg)
	if err != nil {
		t.Fatal(err)
	}
	hs := httptest.NewServer(srv.Handler())
	t.Cleanup(hs.Close)
	return &testServer{Server: hs, srv: srv, store: store, study: st, logs: logs, token: signIn(t, srv, hs)}
}

// issue makes a token of a kind (and role and studies for devices and
// peers) on srv and returns its secret and record.
func issue(t testing.TB, srv *Server, n access.NewToken) (string, *access.Token) {
	t.Helper()
	secret, tok, err := srv.Access().Issue(n)
	if err != nil {
		t.Fatal(err)
	}
	return secret, tok
}

// signIn issues a coordinator token for scripts and makes hs.Client()
// send it on every request that carries no Authorization header of its
// own. It returns the token.
func signIn(t testing.TB, srv *Server, hs *httptest.Server) string {
	t.Helper()
	secret, _ := issue(t, srv, access.NewToken{Kind: access.KindCoordinator, Label: "test coordinator"})
	c := hs.Client()
	c.Transport = bearer{c.Transport, secret}
	return secret
}

// bearer adds "Authorization: Bearer token" to requests without one.
type bearer struct {
	base  http.RoundTripper
	token string
}

func (b bearer) RoundTrip(r *http.Request) (*http.Response, error) {
	if r.Header.Get("Authorization") == "" {
		r = r.Clone(r.Context())
		r.Header.Set("Authorization", "Bearer "+b.token)
	}
	return b.base.RoundTrip(r)
}

// answer is a decoded reply.
type answer struct {
	status int
	header http.Header
	raw    []byte
}

func (a answer) decode(t *testing.T, v any) {
	t.Helper()
	if err := json.Unmarshal(a.raw, v); err != nil {
		t.Fatalf("reply %q is not the expected JSON: %v", a.raw, err)
	}
}

func (a answer) errorBody(t *testing.T) errorBody {
	t.Helper()
	var e errorBody
	a.decode(t, &e)
	if e.Error == "" {
		t.Fatalf("error reply %q has no error message", a.raw)
	}
	return e
}

// do sends a request as the coordinator (the token of ts.Client()).
func (ts *testServer) do(t *testing.T, method, path, body string) answer {
	t.Helper()
	return ts.send(t, ts.Client(), "", method, path, body)
}

// send sends a request with client, adding "Authorization: Bearer token"
// when token is not "", and reads the whole answer.
func (ts *testServer) send(t *testing.T, client *http.Client, token, method, path, body string) answer {
	t.Helper()
	var r io.Reader
	if body != "" {
		r = strings.NewReader(body)
	}
	req, err := http.NewRequest(method, ts.URL+path, r)
	if err != nil {
		t.Fatal(err)
	}
	if body != "" {
		req.Header.Set("Content-Type", "application/json")
	}
	if token != "" {
		req.Header.Set("Authorization", "Bearer "+token)
	}
	resp, err := client.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	raw, err := io.ReadAll(resp.Body)
	if err != nil {
		t.Fatal(err)
	}
	return answer{resp.StatusCode, resp.Header, raw}
}

func (ts *testServer) count(t *testing.T) int {
	t.Helper()
	all, err := ts.store.Captures(ts.study.ID, true)
	if err != nil {
		t.Fatal(err)
	}
	return len(all)
}

// validCapture is a new mark at station A1 during occasion 1 of
// storetest.Study().
const validCapture = `{"tag_id":"BF-0001","event":"new","species":"bank vole","sex":"female",
 "age":"adult","mass_g":21.5,"station_id":"A1","captured_at":"2025-06-02T22:10:00Z","observer":"test crew"}`

func TestHealthAndIndex(t *testing.T) {
	ts := newTestServer(t, nil)
	if a := ts.do(t, "GET", "/healthz", ""); a.status != 200 || !bytes.Contains(a.raw, []byte(`"tagtally"`)) {
		t.Errorf("GET /healthz = %d %s", a.status, a.raw)
	}
	a := ts.do(t, "GET", "/api/v1", "")
	var idx struct {
		Endpoints []struct{ Method, Path string }
	}
	a.decode(t, &idx)
	if a.status != 200 || len(idx.Endpoints) != len((&Server{}).routes()) {
		t.Errorf("GET /api/v1 = %d with %d endpoints", a.status, len(idx.Endpoints))
	}
}

// TestStatusCodes walks each error class the API promises and checks the
// status, that the body is the JSON error shape, and the field it names.
func TestStatusCodes(t *testing.T) {
	ts := newTestServer(t, func(c *Config) { c.MaxBodyBytes = 4096 })
	base := "/api/v1/studies/" + ts.study.ID
	tests := []struct {
		name, method, path, body string
		status                   int
		field                    string
	}{
		{"unknown study", "GET", "/api/v1/studies/no-such-study", "", 404, ""},
		{"unknown capture", "GET", base + "/captures/0190f3a0-0000-7000-8000-000000000000", "", 404, ""},
		{"captures of unknown study", "GET", "/api/v1/studies/nope/captures", "", 404, ""},
		{"unknown endpoint", "GET", "/api/v1/nothing-here", "", 404, ""},
		{"malformed JSON", "POST", base + "/captures", `{"tag_id": "BF-0001",`, 400, ""},
		{"not JSON at all", "POST", base + "/captures", `tag BF-0001`, 400, ""},
		{"unknown field", "POST", base + "/captures", `{"tag_id":"BF-0001","weight":20}`, 400, "weight"},
		{"wrong type", "POST", base + "/captures", `{"tag_id":"BF-0001","mass_g":"heavy"}`, 400, "mass_g"},
		{"two JSON values", "POST", base + "/captures", validCapture + `{}`, 400, ""},
		{"empty body", "POST", base + "/captures", ``, 400, ""},
		{"bad limit", "GET", base + "/captures?limit=-3", "", 400, "limit"},
		{"bad cursor", "GET", base + "/captures?cursor=page2", "", 400, "cursor"},
		{"bad occasion filter", "GET", base + "/captures?occasion=first", "", 400, "occasion"},
		{"tag outside the series", "POST", base + "/captures", strings.Replace(validCapture, "BF-0001", "XX-9", 1), 422, "tag_id"},
		{"mass not positive", "POST", base + "/captures", strings.Replace(validCapture, "21.5", "-2", 1), 422, "mass_g"},
		{"unknown station", "POST", base + "/captures", strings.Replace(validCapture, `"A1"`, `"Z9"`, 1), 422, "station_id"},
		{"study mismatch", "POST", base + "/captures", strings.Replace(validCapture, `{`, `{"study_id":"other",`, 1), 422, "study_id"},
		{"body too large", "POST", base + "/captures", `{"notes":"` + strings.Repeat("x", 5000) + `"}`, 413, ""},
		{"study without name", "POST", "/api/v1/studies", `{"id":"s2","design":"closed"}`, 422, "name"},
		{"existing study", "POST", "/api/v1/studies", `{"id":"` + ts.study.ID + `","name":"again","design":"open"}`, 409, ""},
		{"overlapping occasions", "PUT", base + "/occasions", `[{"index":1,"start":"2025-06-02T18:00:00Z","end":"2025-06-03T08:00:00Z"},{"index":2,"start":"2025-06-03T07:00:00Z","end":"2025-06-03T09:00:00Z"}]`, 422, "occasions"},
		{"duplicate station", "POST", base + "/stations", `{"id":"A1","label":"again","kind":"trap"}`, 409, ""},
		{"method not allowed", "PATCH", base, `{}`, 405, ""},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			before := ts.count(t)
			a := ts.do(t, tc.method, tc.path, tc.body)
			if a.status != tc.status {
				t.Fatalf("%s %s = %d %s, want %d", tc.method, tc.path, a.status, a.raw, tc.status)
			}
			if e := a.errorBody(t); e.Field != tc.field {
				t.Errorf("error names field %q, want %q (%s)", e.Field, tc.field, e.Error)
			}
			if after := ts.count(t); after != before {
				t.Errorf("a refused request changed the store: %d records, then %d", before, after)
			}
		})
	}
}

// TestInvalidCaptureWritesNothing is the acceptance check: an invalid
// capture gets a 422 naming the field, and nothing is written.
func TestInvalidCaptureWritesNothing(t *testing.T) {
	ts := newTestServer(t, nil)
	body := strings.Replace(validCapture, `"BF-0001"`, `"bf 1"`, 1)
	a := ts.do(t, "POST", "/api/v1/studies/"+ts.study.ID+"/captures", body)
	if a.status != http.StatusUnprocessableEntity {
		t.Fatalf("status %d, want 422: %s", a.status, a.raw)
	}
	if e := a.errorBody(t); e.Field != "tag_id" || !strings.Contains(e.Error, "bf 1") {
		t.Errorf("error %+v should name tag_id and the tag given", e)
	}
	if n := ts.count(t); n != 0 {
		t.Errorf("%d records stored after a refused capture", n)
	}
}

func TestCaptureLifecycle(t *testing.T) {
	ts := newTestServer(t, nil)
	base := "/api/v1/studies/" + ts.study.ID + "/captures"
	a := ts.do(t, "POST", base, validCapture)
	if a.status != http.StatusCreated {
		t.Fatalf("create = %d %s", a.status, a.raw)
	}
	var created captureAnswer
	a.decode(t, &created)
	c := created.Capture
	if c.ID == "" || c.Occasion != 1 || c.StudyID != ts.study.ID || len(created.Findings) != 0 {
		t.Fatalf("created %+v with findings %v; want an ID, occasion 1 (derived from the time), no findings", c, created.Findings)
	}
	if loc := a.header.Get("Location"); loc != base+"/"+c.ID {
		t.Errorf("Location %q", loc)
	}
	// The same ID again is a conflict, not a second record.
	dup := strings.Replace(validCapture, `{`, `{"id":"`+c.ID+`",`, 1)
	if a := ts.do(t, "POST", base, dup); a.status != http.StatusConflict {
		t.Errorf("create with an existing ID = %d, want 409", a.status)
	}

	// A recapture of a tag never marked is accepted with a finding.
	rec := strings.NewReplacer("BF-0001", "BF-0777", `"new"`, `"recapture"`).Replace(validCapture)
	a = ts.do(t, "POST", base, rec)
	var flagged captureAnswer
	a.decode(t, &flagged)
	if a.status != http.StatusCreated || !flagged.Findings.Has(capture.FindingNeverMarked) {
		t.Errorf("recapture of an unmarked tag = %d, findings %v; want 201 with %q", a.status, flagged.Findings, capture.FindingNeverMarked)
	}

	// Update: the mass changes; the body may leave the ID out.
	upd := strings.Replace(validCapture, "21.5", "22", 1)
	a = ts.do(t, "PUT", base+"/"+c.ID, upd)
	var updated captureAnswer
	a.decode(t, &updated)
	if a.status != 200 || updated.Capture.MassG == nil || *updated.Capture.MassG != 22 || updated.Capture.ID != c.ID {
		t.Fatalf("update = %d %s", a.status, a.raw)
	}
	wrongID := strings.Replace(validCapture, `{`, `{"id":"0190f3a0-0000-7000-8000-000000000000",`, 1)
	if a := ts.do(t, "PUT", base+"/"+c.ID, wrongID); a.status != 422 || a.errorBody(t).Field != "id" {
		t.Errorf("update naming another ID = %d %s, want 422 on id", a.status, a.raw)
	}
	if a := ts.do(t, "PUT", base+"/0190f3a0-0000-7000-8000-000000000000", validCapture); a.status != 404 {
		t.Errorf("update of a missing capture = %d, want 404", a.status)
	}

	// Soft delete: gone from the list, still readable, kept in the store.
	if a := ts.do(t, "DELETE", base+"/"+c.ID, ""); a.status != http.StatusNoContent {
		t.Fatalf("delete = %d %s", a.status, a.raw)
	}
	a = ts.do(t, "GET", base+"/"+c.ID, "")
	var got capture.Capture
	a.decode(t, &got)
	if a.status != 200 || !got.Revision.Deleted {
		t.Errorf("GET of a deleted capture = %d deleted=%v; want 200 and deleted", a.status, got.Revision.Deleted)
	}
	var page capturePage
	ts.do(t, "GET", base, "").decode(t, &page)
	if len(page.Captures) != 1 || page.Captures[0].TagID != "BF-0777" {
		t.Errorf("list after delete has %d records, want only BF-0777", len(page.Captures))
	}
	ts.do(t, "GET", base+"?deleted=true", "").decode(t, &page)
	if len(page.Captures) != 2 {
		t.Errorf("list with deleted=true has %d records, want 2", len(page.Captures))
	}
	if a := ts.do(t, "DELETE", base+"/"+c.ID, ""); a.status != http.StatusNoContent {
		t.Errorf("deleting twice = %d, want 204 (nothing to do)", a.status)
	}
	if a := ts.do(t, "PUT", base+"/"+c.ID, upd); a.status != http.StatusConflict {
		t.Errorf("update of a deleted capture = %d, want 409", a.status)
	}
	if a := ts.do(t, "DELETE", base+"/0190f3a0-0000-7000-8000-000000000000", ""); a.status != 404 {
		t.Errorf("delete of a missing capture = %d, want 404", a.status)
	}
}

func TestStudyOccasionsStations(t *testing.T) {
	ts := newTestServer(t, nil)
	a := ts.do(t, "POST", "/api/v1/studies", `{"id":"pond-2026","name":"Pond newts 2026","design":"closed","target_species":["smooth newt"]}`)
	if a.status != 201 {
		t.Fatalf("create study = %d %s", a.status, a.raw)
	}
	var list struct{ Studies []capture.Study }
	ts.do(t, "GET", "/api/v1/studies", "").decode(t, &list)
	if len(list.Studies) != 2 {
		t.Errorf("%d studies listed, want 2", len(list.Studies))
	}
	base := "/api/v1/studies/pond-2026"
	for i, body := range []string{
		`{"start":"2026-04-01T19:00:00Z","end":"2026-04-02T07:00:00Z"}`,
		`{"start":"2026-04-02T19:00:00Z","end":"2026-04-03T07:00:00Z"}`,
	} {
		var o capture.Occasion
		a := ts.do(t, "POST", base+"/occasions", body)
		a.decode(t, &o)
		if a.status != 201 || o.Index != i+1 {
			t.Errorf("add occasion %d = %d, index %d", i+1, a.status, o.Index)
		}
	}
	if a := ts.do(t, "POST", base+"/occasions", `{"start":"2026-04-01T20:00:00Z","end":"2026-04-01T21:00:00Z"}`); a.status != 422 {
		t.Errorf("occasion inside an earlier window = %d, want 422", a.status)
	}
	if a := ts.do(t, "POST", base+"/stations", `{"id":"P1","label":"pond edge","kind":"trap","lat":91,"lon":0}`); a.status != 422 || a.errorBody(t).Field != "stations[0].lat" {
		t.Errorf("station at latitude 91 = %d %s", a.status, a.raw)
	}
	if a := ts.do(t, "POST", base+"/stations", `{"id":"P1","label":"pond edge","kind":"trap"}`); a.status != 201 {
		t.Errorf("add station = %d %s", a.status, a.raw)
	}
	a = ts.do(t, "PUT", base+"/stations", `[{"id":"P1","label":"pond edge"},{"id":"P2","label":"ditch"}]`)
	var stn struct{ Stations []capture.Station }
	a.decode(t, &stn)
	if a.status != 200 || len(stn.Stations) != 2 {
		t.Errorf("replace stations = %d %s", a.status, a.raw)
	}
	var st capture.Study
	ts.do(t, "GET", base, "").decode(t, &st)
	if len(st.Occasions) != 2 || len(st.Stations) != 2 || st.CreatedAt.IsZero() {
		t.Errorf("study after edits: %d occasions, %d stations, created %v", len(st.Occasions), len(st.Stations), st.CreatedAt)
	}
	// Replacing the study keeps its creation time when the body leaves it out.
	a = ts.do(t, "PUT", base, `{"name":"Pond newts 2026 (renamed)","design":"closed"}`)
	var renamed capture.Study
	a.decode(t, &renamed)
	if a.status != 200 || renamed.ID != "pond-2026" || !renamed.CreatedAt.Equal(st.CreatedAt) {
		t.Errorf("update study = %d %s", a.status, a.raw)
	}
	if a := ts.do(t, "PUT", "/api/v1/studies/none", `{"name":"x","design":"closed"}`); a.status != 404 {
		t.Errorf("update of a missing study = %d, want 404", a.status)
	}
}

// TestInternalErrorIsGeneric closes the store under the server so every
// read fails: the client gets a generic 500 and the log gets the cause.
func TestInternalErrorIsGeneric(t *testing.T) {
	store, err := capture.Open(t.TempDir()+"/x.db", nil)
	if err != nil {
		t.Fatal(err)
	}
	logs := new(bytes.Buffer)
	cfg := DefaultConfig()
	cfg.Logger = slog.New(slog.NewTextHandler(logs, nil))
	srv, err := New(store, cfg)
	if err != nil {
		t.Fatal(err)
	}
	secret, _ := issue(t, srv, access.NewToken{Kind: access.KindCoordinator, Label: "test"})
	store.Close()
	rec := httptest.NewRecorder()
	req := httptest.NewRequest("GET", "/api/v1/studies", nil)
	req.Header.Set("Authorization", "Bearer "+secret)
	srv.Handler().ServeHTTP(rec, req)
	if rec.Code != 500 || !strings.Contains(rec.Body.String(), "server log") || strings.Contains(rec.Body.String(), "database") {
		t.Errorf("reply %d %s; want a generic 500", rec.Code, rec.Body)
	}
	if !strings.Contains(logs.String(), "database not open") {
		t.Errorf("log lacks the cause: %s", logs)
	}
}

func TestConfigValidate(t *testing.T) {
	for _, tc := range []struct {
		name string
		edit func(*Config)
		ok   bool
	}{
		{"defaults", func(*Config) {}, true},
		{"loopback", func(c *Config) { c.Addr = "127.0.0.1:0" }, true},
		{"no port", func(c *Config) { c.Addr = "127.0.0.1" }, false},
		{"host name", func(c *Config) { c.Addr = "camp-laptop:8080" }, false},
		{"port out of range", func(c *Config) { c.Addr = ":70000" }, false},
		{"tiny body limit", func(c *Config) { c.MaxBodyBytes = 10 }, false},
		{"zero timeout", func(c *Config) { c.WriteTimeout = 0 }, false},
	} {
		cfg := DefaultConfig()
		tc.edit(&cfg)
		if err := cfg.Validate(); (err == nil) != tc.ok {
			t.Errorf("%s: Validate() = %v", tc.name, err)
		}
	}
}

// TestBodyLimitWithoutLength sends an over-long body in chunks, with no
// Content-Length to refuse it by: reading it must stop at the limit with
// a 413, and nothing is written.
func TestBodyLimitWithoutLength(t *testing.T) {
	ts := newTestServer(t, func(c *Config) { c.MaxBodyBytes = 4096 })
	long := strings.Replace(validCapture, `"observer"`, `"notes":"`+strings.Repeat("x", 8000)+`","observer"`, 1)
	body := struct{ io.Reader }{strings.NewReader(long)} // hides the length
	req, err := http.NewRequest("POST", ts.URL+"/api/v1/studies/"+ts.study.ID+"/captures", body)
	if err != nil {
		t.Fatal(err)
	}
	req.Header.Set("Content-Type", "application/json")
	resp, err := ts.Client().Do(req)
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != http.StatusRequestEntityTooLarge || req.ContentLength != 0 {
		t.Errorf("chunked over-long body = %d (sent length %d), want 413", resp.StatusCode, req.ContentLength)
	}
	if n := ts.count(t); n != 0 {
		t.Errorf("%d records stored", n)
	}
}
