package access_test

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"tagtally/capture"
	"tagtally/capture/storetest"
	"tagtally/server/access"
)

func newService(t *testing.T) (*access.Service, *capture.Store) {
	t.Helper()
	st := storetest.Open(t)
	if err := st.CreateStudy(storetest.Study()); err != nil {
		t.Fatal(err)
	}
	return access.New(st), st
}

// The data file holds only hashes: neither a token nor a join code can
// be read back from it (or from a backup of it).
func TestSecretsAreNotStored(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "camp.db")
	st, err := capture.Open(path, nil)
	if err != nil {
		t.Fatal(err)
	}
	if err := st.CreateStudy(storetest.Study()); err != nil {
		t.Fatal(err)
	}
	svc := access.New(st)
	secret, tok, err := svc.Issue(access.NewToken{Kind: access.KindSession, Label: "browser"})
	if err != nil {
		t.Fatal(err)
	}
	jc, err := svc.NewJoinCode(storetest.Study().ID, access.Recorder, "test")
	if err != nil {
		t.Fatal(err)
	}
	claim, err := svc.NewClaim()
	if err != nil {
		t.Fatal(err)
	}
	if err := st.Close(); err != nil {
		t.Fatal(err)
	}
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	for _, s := range []string{secret, access.NormaliseJoinCode(jc.Code), jc.Code, claim} {
		if bytes.Contains(raw, []byte(s)) {
			t.Errorf("the data file holds the secret %q", s)
		}
	}
	if len(secret) != 43 || tok.CSRF == "" || tok.CSRF == secret {
		t.Errorf("token %q (want 43 base64url characters for 256 bits), CSRF %q", secret, tok.CSRF)
	}
}

func TestTokensAreDistinctAndScoped(t *testing.T) {
	svc, _ := newService(t)
	seen := map[string]bool{}
	for i := 0; i < 50; i++ {
		s, _, err := svc.Issue(access.NewToken{Kind: access.KindDevice, Role: access.Recorder, Studies: []string{storetest.Study().ID}, Label: "p"})
		if err != nil {
			t.Fatal(err)
		}
		if seen[s] {
			t.Fatal("the same token twice")
		}
		seen[s] = true
		tok, err := svc.Authenticate(s)
		if err != nil || !tok.Allows(storetest.Study().ID) || tok.Allows("other") || tok.AllStudies() {
			t.Fatalf("device token %+v, %v", tok, err)
		}
	}
	for _, n := range []access.NewToken{
		{Kind: access.KindDevice, Role: access.Coordinator, Studies: []string{storetest.Study().ID}},
		{Kind: access.KindDevice, Role: access.Recorder},
		{Kind: access.KindDevice, Role: access.Recorder, Studies: []string{"a", "b"}},
		{Kind: access.KindPeer},
		{Kind: "admin"},
		{Kind: access.KindCoordinator, Label: strings.Repeat("x", access.MaxLabel+1)},
		{Kind: access.KindCoordinator, Label: "tab\there"},
	} {
		if _, _, err := svc.Issue(n); err == nil {
			t.Errorf("Issue(%+v) succeeded", n)
		}
	}
	if _, _, err := svc.Issue(access.NewToken{Kind: access.KindPeer, Studies: []string{"no-such-study"}}); err == nil {
		t.Error("a peer token for a study that does not exist")
	}
	for _, s := range []string{"", "short", strings.Repeat("A", 43), strings.Repeat("A", 4000)} {
		if _, err := svc.Authenticate(s); err == nil {
			t.Errorf("Authenticate(%.20q) succeeded", s)
		}
	}
}

// A session unused for longer than SessionIdle ends; a device token
// does not (a phone may stay away from camp for weeks).
func TestSessionIdleEnds(t *testing.T) {
	svc, _ := newService(t)
	sess, _, _ := svc.Issue(access.NewToken{Kind: access.KindSession, Label: "browser"})
	dev, _, _ := svc.Issue(access.NewToken{Kind: access.KindDevice, Role: access.Viewer, Studies: []string{storetest.Study().ID}, Label: "p"})
	svc.SetClock(func() time.Time { return time.Now().Add(access.SessionIdle + time.Hour) })
	if _, err := svc.Authenticate(sess); err == nil {
		t.Error("an idle session still works")
	}
	if _, err := svc.Authenticate(dev); err != nil {
		t.Errorf("a device token idle as long: %v", err)
	}
}

func TestRevokeKind(t *testing.T) {
	svc, _ := newService(t)
	a, _, _ := svc.Issue(access.NewToken{Kind: access.KindLocal, Label: "old run"})
	b, _, _ := svc.Issue(access.NewToken{Kind: access.KindCoordinator, Label: "script"})
	if n, err := svc.RevokeKind(access.KindLocal); err != nil || n != 1 {
		t.Fatalf("RevokeKind = %d, %v", n, err)
	}
	if _, err := svc.Authenticate(a); err == nil {
		t.Error("the previous local token still works")
	}
	if _, err := svc.Authenticate(b); err != nil {
		t.Errorf("another kind was revoked too: %v", err)
	}
}

// The limiter: PerClient attempts per address, Overall in all, counted in
// fixed windows; one address over its own limit does not use up the
// overall count.
func TestLimiter(t *testing.T) {
	now := time.Date(2026, 6, 1, 12, 0, 0, 0, time.UTC)
	l := access.NewLimiter(access.Limits{PerClient: 3, Overall: 5, Window: time.Minute})
	l.SetClock(func() time.Time { return now })
	for i := 0; i < 3; i++ {
		if ok, _ := l.Allow("a"); !ok {
			t.Fatalf("attempt %d refused", i+1)
		}
	}
	for i := 0; i < 20; i++ {
		if ok, wait := l.Allow("a"); ok || wait <= 0 || wait > time.Minute {
			t.Fatalf("attempt past the per-address limit: %v, wait %v", ok, wait)
		}
	}
	if ok, _ := l.Allow("b"); !ok {
		t.Error("address b refused because a hammered")
	}
	l.Allow("c")
	if ok, _ := l.Allow("d"); ok {
		t.Error("the overall limit of 5 did not hold")
	}
	now = now.Add(time.Minute)
	if ok, _ := l.Allow("a"); !ok {
		t.Error("a new window still refuses")
	}
}

// FuzzNormaliseJoinCode: the result is "" or 12 characters of the code
// alphabet, normalising twice changes nothing, and it never panics.
func FuzzNormaliseJoinCode(f *testing.F) {
	for _, s := range []string{"K7QM-3XTA-9PWE", "k7qm 3xta 9pwe", "O0IL-1111-2222", "", "é", "ＡＡＡＡ-ＢＢＢＢ-ＣＣＣＣ", "AAAA-BBBB-CCC\x00", strings.Repeat("A", 65)} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		n := access.NormaliseJoinCode(s)
		if n == "" {
			return
		}
		if len(n) != 12 || strings.Trim(n, "0123456789ABCDEFGHJKMNPQRSTVWXYZ") != "" {
			t.Fatalf("NormaliseJoinCode(%q) = %q", s, n)
		}
		if access.NormaliseJoinCode(n) != n {
			t.Fatalf("not idempotent on %q", n)
		}
	})
}
