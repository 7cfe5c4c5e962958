package server

import (
	"encoding/json"
	"net/http"
	"net/http/httptest"
	"strings"
	"testing"
	"time"

	"tagtally/capture/storetest"
	"tagtally/server/access"
	tsync "tagtally/sync"
)

// doAs sends a request with the given bearer token ("" for none) and no
// other credentials.
func (ts *testServer) doAs(t *testing.T, token, method, path, body string) answer {
	t.Helper()
	return ts.send(t, http.DefaultClient, token, method, path, body)
}

// joinPhone makes a join code through the API as the coordinator and
// joins with it; it returns the device token.
func (ts *testServer) joinPhone(t *testing.T, role, device string) (string, joinCodeAnswer) {
	t.Helper()
	a := ts.do(t, "POST", "/api/v1/studies/"+ts.study.ID+"/join-codes", `{"role":"`+role+`"}`)
	var jc joinCodeAnswer
	a.decode(t, &jc)
	if a.status != 201 || jc.JoinCode == nil || len(jc.QR) < 100 || !strings.HasSuffix(jc.URL, "/#join="+jc.Code) {
		t.Fatalf("join code = %d %s", a.status, a.raw)
	}
	a = ts.doAs(t, "", "POST", "/api/v1/join", `{"code":"`+jc.Code+`","device":"`+device+`"}`)
	var tok tokenAnswer
	a.decode(t, &tok)
	if a.status != 201 || len(tok.Secret) != 43 || tok.Token == nil || tok.Role != access.Role(role) || len(tok.Studies) != 1 || tok.Studies[0] != ts.study.ID {
		t.Fatalf("join = %d %s", a.status, a.raw)
	}
	return tok.Secret, jc
}

// TestJoinCodeIsSingleUseAndExpires: a join code gives one device token
// for its study and role; used again, typed with other spacing, or after
// its 15 minutes it is refused.
func TestJoinCodeIsSingleUseAndExpires(t *testing.T) {
	ts := newTestServer(t, nil)
	dev, jc := ts.joinPhone(t, "recorder", "crew 2 phone")
	if a := ts.doAs(t, dev, "POST", "/api/v1/studies/"+ts.study.ID+"/captures", validCapture); a.status != 201 {
		t.Errorf("recorder's capture = %d %s", a.status, a.raw)
	}
	// Used: refused, whatever the spelling.
	for _, code := range []string{jc.Code, strings.ToLower(strings.ReplaceAll(jc.Code, "-", " "))} {
		a := ts.doAs(t, "", "POST", "/api/v1/join", `{"code":"`+code+`","device":"thief"}`)
		if a.status != 401 || !strings.Contains(a.errorBody(t).Error, "already used") {
			t.Errorf("used code %q = %d %s, want 401", code, a.status, a.raw)
		}
	}
	// Expired: a fresh code, joined 16 minutes later.
	a := ts.do(t, "POST", "/api/v1/studies/"+ts.study.ID+"/join-codes", `{"role":"viewer"}`)
	var late joinCodeAnswer
	a.decode(t, &late)
	ts.srv.Access().SetClock(func() time.Time { return time.Now().Add(access.JoinTTL + time.Minute) })
	if a := ts.doAs(t, "", "POST", "/api/v1/join", `{"code":"`+late.Code+`","device":"late phone"}`); a.status != 401 {
		t.Errorf("expired code = %d %s, want 401", a.status, a.raw)
	}
	ts.srv.Access().SetClock(time.Now)
	if a := ts.doAs(t, "", "POST", "/api/v1/join", `{"code":"`+late.Code+`","device":"late phone"}`); a.status != 401 {
		t.Errorf("an expired code works again after the clock is back: %d", a.status)
	}
	// A typed code: lower case, spaces, O for 0 all work once.
	a = ts.do(t, "POST", "/api/v1/studies/"+ts.study.ID+"/join-codes", `{"role":"viewer"}`)
	var typed joinCodeAnswer
	a.decode(t, &typed)
	sloppy := strings.ToLower(strings.ReplaceAll(strings.ReplaceAll(typed.Code, "-", "  "), "0", "o"))
	if a := ts.doAs(t, "", "POST", "/api/v1/join", `{"code":"`+sloppy+`","device":"viewer phone"}`); a.status != 201 {
		t.Errorf("typed code %q = %d %s", sloppy, a.status, a.raw)
	}
	// Bad join-code requests.
	for _, body := range []string{`{"role":"coordinator"}`, `{"role":"peer"}`, `{"role":""}`} {
		if a := ts.do(t, "POST", "/api/v1/studies/"+ts.study.ID+"/join-codes", body); a.status != 422 {
			t.Errorf("join code %s = %d, want 422", body, a.status)
		}
	}
	if a := ts.do(t, "POST", "/api/v1/studies/no-such-study/join-codes", `{"role":"viewer"}`); a.status != 404 {
		t.Errorf("join code for a missing study = %d, want 404", a.status)
	}
}

// TestRevokedTokenIsRefusedAtOnce: after the coordinator revokes a phone,
// its very next request is refused with a message saying what to do, and
// the records it synced stay.
func TestRevokedTokenIsRefusedAtOnce(t *testing.T) {
	ts := newTestServer(t, nil)
	dev, _ := ts.joinPhone(t, "recorder", "lost phone")
	id := "01890a5d-ac96-774b-bcce-b302099a8057"
	push := `{"source":"phone-9","revisions":[` + phoneRevision(t, ts.study.ID, id, "BF-0009") + `]}`
	if a := ts.doAs(t, dev, "POST", "/api/v1/sync/push", push); a.status != 200 || !strings.Contains(string(a.raw), `"stored"`) {
		t.Fatalf("push = %d %s", a.status, a.raw)
	}
	var list struct{ Tokens []access.Token }
	ts.do(t, "GET", "/api/v1/access/tokens", "").decode(t, &list)
	var devID string
	for _, tk := range list.Tokens {
		if tk.Label == "lost phone" {
			devID = tk.ID
		}
	}
	if a := ts.doAs(t, dev, "GET", "/api/v1/studies/"+ts.study.ID, ""); a.status != 200 {
		t.Fatalf("before revoke = %d", a.status)
	}
	if a := ts.do(t, "POST", "/api/v1/access/tokens/"+devID+"/revoke", ""); a.status != 200 {
		t.Fatalf("revoke = %d %s", a.status, a.raw)
	}
	a := ts.doAs(t, dev, "GET", "/api/v1/studies/"+ts.study.ID, "")
	if a.status != 401 || !strings.Contains(a.errorBody(t).Error, "revoked") {
		t.Errorf("after revoke = %d %s, want 401 saying revoked", a.status, a.raw)
	}
	if a := ts.doAs(t, dev, "POST", "/api/v1/sync/push", push); a.status != 401 {
		t.Errorf("push after revoke = %d", a.status)
	}
	if _, err := ts.store.GetCapture(ts.study.ID, id); err != nil {
		t.Errorf("the revoked phone's synced record is gone: %v", err)
	}
	if a := ts.do(t, "POST", "/api/v1/access/tokens/no-such/revoke", ""); a.status != 404 {
		t.Errorf("revoke of an unknown token = %d, want 404", a.status)
	}
}

// TestJoinGuessingHitsTheLimit: wrong join codes from one address are
// refused with 401 up to the per-address limit, then with 429 and a
// Retry-After, even for a right code; other addresses together hit the
// overall limit.
func TestJoinGuessingHitsTheLimit(t *testing.T) {
	ts := newTestServer(t, nil)
	a := ts.do(t, "POST", "/api/v1/studies/"+ts.study.ID+"/join-codes", `{"role":"recorder"}`)
	var jc joinCodeAnswer
	a.decode(t, &jc)
	join := func(addr, code string) *httptest.ResponseRecorder {
		req := httptest.NewRequest("POST", "/api/v1/join", strings.NewReader(`{"code":"`+code+`","device":"guesser"}`))
		req.Header.Set("Content-Type", "application/json")
		req.RemoteAddr = addr + ":40000"
		rec := httptest.NewRecorder()
		ts.srv.Handler().ServeHTTP(rec, req)
		return rec
	}
	lim := access.DefaultLimits
	for i := 0; i < lim.PerClient; i++ {
		if rec := join("192.0.2.50", "AAAA-AAAA-AAA"+string(rune('A'+i%20))); rec.Code != 401 {
			t.Fatalf("guess %d = %d %s, want 401", i+1, rec.Code, rec.Body)
		}
	}
	rec := join("192.0.2.50", jc.Code)
	if rec.Code != 429 || rec.Header().Get("Retry-After") == "" || !strings.Contains(rec.Body.String(), "too many attempts") {
		t.Fatalf("attempt past the limit = %d %v %s, want 429 with Retry-After", rec.Code, rec.Header(), rec.Body)
	}
	// Refusals past the limit are not written to the audit log, or a
	// guesser could fill the data file.
	auditLen := func() int {
		entries, err := ts.srv.Access().Audit(10000, 0)
		if err != nil {
			t.Fatal(err)
		}
		return len(entries)
	}
	before := auditLen()
	for i := 0; i < 20; i++ {
		join("192.0.2.50", "CCCC-CCCC-CCCC")
	}
	if after := auditLen(); after != before {
		t.Errorf("20 refusals past the limit added %d audit entries, want none", after-before)
	}
	// Coordinator-link claims count against the same limit.
	claim := httptest.NewRequest("POST", "/api/v1/access/claim", strings.NewReader(`{"code":"`+strings.Repeat("A", 43)+`"}`))
	claim.Header.Set("Content-Type", "application/json")
	claim.RemoteAddr = "192.0.2.50:40001"
	crec := httptest.NewRecorder()
	ts.srv.Handler().ServeHTTP(crec, claim)
	if crec.Code != 429 {
		t.Errorf("a claim from the same address past the limit = %d, want 429", crec.Code)
	}
	// Many addresses: the overall limit.
	refused := 0
	for i := 0; i < lim.Overall+5; i++ {
		addr := "198.51.100." + string(rune('0'+i/10)) + string(rune('0'+i%10))
		if join(addr, "BBBB-BBBB-BBBB").Code == 429 {
			refused++
		}
	}
	if refused < 5 {
		t.Errorf("%d of %d attempts from many addresses refused with 429; want the overall limit of %d per %v to hold", refused, lim.Overall+5, lim.Overall, lim.Window)
	}
	// The code itself was never used: a new window lets it work.
	ts.srv.Access().Attempt.SetClock(func() time.Time { return time.Now().Add(lim.Window + time.Second) })
	if rec := join("192.0.2.50", jc.Code); rec.Code != 201 {
		t.Errorf("the right code in the next window = %d %s", rec.Code, rec.Body)
	}
}

// claimSession claims a coordinator link through the API and returns the
// session cookie and CSRF token.
func claimSession(t *testing.T, ts *testServer) (*http.Cookie, string) {
	t.Helper()
	code, err := ts.srv.Access().NewClaim()
	if err != nil {
		t.Fatal(err)
	}
	a := ts.doAs(t, "", "POST", "/api/v1/access/claim", `{"code":"`+code+`"}`)
	var ans tokenAnswer
	a.decode(t, &ans)
	if a.status != 200 || ans.CSRF == "" || ans.Secret != "" {
		t.Fatalf("claim = %d %s (the session token must travel only in the cookie)", a.status, a.raw)
	}
	var ck *http.Cookie
	for _, c := range (&http.Response{Header: a.header}).Cookies() {
		if c.Name == SessionCookie {
			ck = c
		}
	}
	if ck == nil || !ck.HttpOnly || ck.SameSite != http.SameSiteStrictMode || ck.Path != "/" {
		t.Fatalf("session cookie %+v: want HttpOnly, SameSite=Strict, Path=/", ck)
	}
	if a := ts.doAs(t, "", "POST", "/api/v1/access/claim", `{"code":"`+code+`"}`); a.status != 401 {
		t.Errorf("a claim code used twice = %d, want 401", a.status)
	}
	return ck, ans.CSRF
}

// TestSessionNeedsCSRFForChanges: with the session cookie, reads work,
// and a change works only with the matching CSRF header; refused
// changes write nothing.
func TestSessionNeedsCSRFForChanges(t *testing.T) {
	ts := newTestServer(t, nil)
	ck, csrf := claimSession(t, ts)
	send := func(method, path, body, header string) int {
		req, _ := http.NewRequest(method, ts.URL+path, strings.NewReader(body))
		req.Header.Set("Content-Type", "application/json")
		req.AddCookie(&http.Cookie{Name: ck.Name, Value: ck.Value})
		if header != "" {
			req.Header.Set(CSRFHeader, header)
		}
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		return resp.StatusCode
	}
	base := "/api/v1/studies/" + ts.study.ID
	if code := send("GET", base, "", ""); code != 200 {
		t.Errorf("read with the cookie = %d", code)
	}
	for _, h := range []string{"", "wrong", csrf[:20]} {
		if code := send("POST", base+"/captures", validCapture, h); code != 403 {
			t.Errorf("change with CSRF header %q = %d, want 403", h, code)
		}
	}
	if n := ts.count(t); n != 0 {
		t.Fatalf("%d records written by refused changes", n)
	}
	if code := send("POST", base+"/captures", validCapture, csrf); code != 201 {
		t.Errorf("change with the CSRF header = %d, want 201", code)
	}
	// /access/me gives the CSRF token back to the cookie's holder (a page
	// reload), not to a bearer token.
	req, _ := http.NewRequest("GET", ts.URL+"/api/v1/access/me", nil)
	req.AddCookie(&http.Cookie{Name: ck.Name, Value: ck.Value})
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	var me tokenAnswer
	json.NewDecoder(resp.Body).Decode(&me)
	resp.Body.Close()
	if me.CSRF != csrf || me.Kind != access.KindSession || me.Role != access.Coordinator {
		t.Errorf("me with the cookie: %+v", me)
	}
	// A new coordinator link makes older unused ones stop working.
	old, _ := ts.srv.Access().NewClaim()
	if _, err := ts.srv.Access().NewClaim(); err != nil {
		t.Fatal(err)
	}
	if a := ts.doAs(t, "", "POST", "/api/v1/access/claim", `{"code":"`+old+`"}`); a.status != 401 {
		t.Errorf("an older link after a new one = %d, want 401", a.status)
	}
	// Signing out ends the session at once.
	if code := send("POST", "/api/v1/access/sign-out", "", csrf); code != 204 {
		t.Errorf("sign-out = %d", code)
	}
	if code := send("GET", base, "", ""); code != 401 {
		t.Errorf("read after sign-out = %d, want 401", code)
	}
}

// TestSyncStaysInTheTokensStudies: a recorder of one study pushing
// revisions of two studies gets the other study's rejected one by one;
// its pulls return only its study.
func TestSyncStaysInTheTokensStudies(t *testing.T) {
	ts := newTestServer(t, nil)
	other := storetest.Study()
	other.ID, other.Name = otherStudyID, "Another grid"
	if err := ts.store.CreateStudy(other); err != nil {
		t.Fatal(err)
	}
	mine, theirs := "01890a5d-ac96-774b-bcce-b302099a8057", "01890a5d-ac96-774b-bcce-b302099a8058"
	// The coordinator stores one record in the other study first.
	elsewhere := "01890a5d-ac96-774b-bcce-b302099a8059"
	if a := ts.do(t, "POST", "/api/v1/sync/push", `{"source":"office","revisions":[`+phoneRevision(t, otherStudyID, elsewhere, "BF-0100")+`]}`); a.status != 200 {
		t.Fatal(a.status)
	}
	dev, _ := ts.joinPhone(t, "recorder", "crew phone")
	a := ts.doAs(t, dev, "POST", "/api/v1/sync/push", `{"source":"phone-3","revisions":[`+
		phoneRevision(t, ts.study.ID, mine, "BF-0001")+`,`+phoneRevision(t, otherStudyID, theirs, "BF-0002")+`]}`)
	var rep tsync.PushReply
	a.decode(t, &rep)
	if a.status != 200 || len(rep.Results) != 2 || rep.Results[0].Status != tsync.StatusStored ||
		rep.Results[1].Status != tsync.StatusRejected || !strings.Contains(rep.Results[1].Reason, "outside") {
		t.Fatalf("push = %d %s", a.status, a.raw)
	}
	if _, err := ts.store.GetCapture(otherStudyID, theirs); err == nil {
		t.Error("a revision of another study was stored")
	}
	var page tsync.PullPage
	ts.doAs(t, dev, "GET", "/api/v1/sync/pull?limit=100", "").decode(t, &page)
	if len(page.Revisions) != 1 || !strings.Contains(string(page.Revisions[0]), mine) {
		t.Errorf("pull of all studies by the recorder: %d revisions %s; want only its study's one", len(page.Revisions), page.Revisions)
	}
	if a := ts.doAs(t, dev, "GET", "/api/v1/sync/pull?study="+otherStudyID, ""); a.status != 403 {
		t.Errorf("pull of another study = %d, want 403", a.status)
	}
	var studies struct{ Studies []struct{ ID string } }
	ts.doAs(t, dev, "GET", "/api/v1/studies", "").decode(t, &studies)
	if len(studies.Studies) != 1 || studies.Studies[0].ID != ts.study.ID {
		t.Errorf("studies listed to the recorder: %+v", studies)
	}
	// The coordinator still sees both.
	ts.do(t, "GET", "/api/v1/sync/pull?limit=100", "").decode(t, &page)
	if len(page.Revisions) != 2 {
		t.Errorf("coordinator's pull: %d revisions, want 2", len(page.Revisions))
	}
}

// TestPeerToken: the coordinator makes a peer token for a study; it can
// sync but not read the study through the API.
func TestPeerToken(t *testing.T) {
	ts := newTestServer(t, nil)
	a := ts.do(t, "POST", "/api/v1/access/tokens", `{"kind":"peer","label":"program office","studies":["`+ts.study.ID+`"]}`)
	var tok tokenAnswer
	a.decode(t, &tok)
	if a.status != 201 || len(tok.Secret) != 43 || tok.Role != access.Peer {
		t.Fatalf("peer token = %d %s", a.status, a.raw)
	}
	if a := ts.doAs(t, tok.Secret, "GET", "/api/v1/sync/pull", ""); a.status != 200 {
		t.Errorf("peer pull = %d", a.status)
	}
	if a := ts.doAs(t, tok.Secret, "GET", "/api/v1/studies/"+ts.study.ID+"/captures", ""); a.status != 403 {
		t.Errorf("peer reading captures = %d, want 403", a.status)
	}
	for _, body := range []string{
		`{"kind":"peer","label":"no studies"}`,
		`{"kind":"peer","label":"x","studies":["no-such-study"]}`,
		`{"kind":"device","label":"x","studies":["` + ts.study.ID + `"]}`,
		`{"kind":"coordinator","label":"` + strings.Repeat("x", 200) + `"}`,
	} {
		if a := ts.do(t, "POST", "/api/v1/access/tokens", body); a.status < 400 || a.status >= 500 {
			t.Errorf("token request %.60s = %d, want a 4xx", body, a.status)
		}
	}
}

// TestAuditLogNamesWhoChangedWhat: a phone's capture, a refused change
// and a revoke are in the audit log with who, route, study, record and
// status; reads are not.
func TestAuditLogNamesWhoChangedWhat(t *testing.T) {
	ts := newTestServer(t, nil)
	dev, _ := ts.joinPhone(t, "viewer", "viewer phone")
	rec, _ := ts.joinPhone(t, "recorder", "crew 1 phone")
	a := ts.doAs(t, rec, "POST", "/api/v1/studies/"+ts.study.ID+"/captures", validCapture)
	var made captureAnswer
	a.decode(t, &made)
	ts.doAs(t, dev, "POST", "/api/v1/studies/"+ts.study.ID+"/captures", validCapture) // refused: viewer
	ts.do(t, "GET", "/api/v1/studies", "")
	var log struct{ Entries []access.Entry }
	ts.do(t, "GET", "/api/v1/access/audit", "").decode(t, &log)
	var sawCreate, sawRefusal bool
	for _, e := range log.Entries {
		if e.Method == "GET" {
			t.Errorf("a read is in the audit log: %+v", e)
		}
		if e.Who == "crew 1 phone" && e.Route == "/api/v1/studies/:study/captures" && e.Status == 201 && e.Record == made.Capture.ID && e.Study == ts.study.ID && e.TokenID != "" {
			sawCreate = true
		}
		if e.Who == "viewer phone" && e.Status == 403 {
			sawRefusal = true
		}
	}
	if !sawCreate || !sawRefusal {
		t.Errorf("audit log lacks the capture (%v) or the viewer's refused write (%v): %+v", sawCreate, sawRefusal, log.Entries)
	}
	for i := 1; i < len(log.Entries); i++ {
		if log.Entries[i].Seq >= log.Entries[i-1].Seq {
			t.Fatalf("audit log not newest first: %d then %d", log.Entries[i-1].Seq, log.Entries[i].Seq)
		}
	}
	var older struct{ Entries []access.Entry }
	ts.do(t, "GET", "/api/v1/access/audit?limit=2&before="+jsonNum(log.Entries[0].Seq), "").decode(t, &older)
	if len(older.Entries) != 2 || older.Entries[0].Seq != log.Entries[1].Seq {
		t.Errorf("paging the audit log: %+v", older.Entries)
	}
}

func jsonNum(n uint64) string { b, _ := json.Marshal(n); return string(b) }

// TestSecurityHeadersOnEveryAnswer: pages, API answers and errors all
// carry the CSP, frame denial, nosniff and referrer policy.
func TestSecurityHeadersOnEveryAnswer(t *testing.T) {
	ts := newTestServer(t, nil)
	for _, p := range []string{"/", "/coord/", "/js/main.js", "/api/v1", "/api/v1/studies", "/api/v1/nothing", "/no-such-file"} {
		a := ts.doAs(t, "", "GET", p, "")
		h := a.header
		csp := h.Get("Content-Security-Policy")
		if !strings.Contains(csp, "script-src 'self'") || strings.Contains(csp, "unsafe-inline") || !strings.Contains(csp, "frame-ancestors 'none'") ||
			h.Get("X-Frame-Options") != "DENY" || h.Get("X-Content-Type-Options") != "nosniff" || h.Get("Referrer-Policy") != "no-referrer" {
			t.Errorf("GET %s (%d): headers %v", p, a.status, h)
		}
		if strings.HasPrefix(p, "/api/") && h.Get("Cache-Control") != "no-store" {
			t.Errorf("GET %s: Cache-Control %q, want no-store", p, h.Get("Cache-Control"))
		}
	}
}
