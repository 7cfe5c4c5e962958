package server

import (
	"strings"
	stdsync "sync"
	"testing"
	"time"

	cdplog "github.com/chromedp/cdproto/log"

	"github.com/chromedp/chromedp"
	"github.com/chromedp/chromedp/kb"

	"tagtally/demo"
	"tagtally/server/access"
)

// watchCSP fails the test if the browser reports a Content-Security-Policy
// violation: an inline script, style attribute or outside resource that
// the server's policy blocked would silently break the page.
func watchCSP(p page) {
	var mu stdsync.Mutex
	var seen []string
	if err := chromedp.Listen(p.ctx, func(ev any) {
		if e, ok := ev.(*cdplog.EventEntryAdded); ok && strings.Contains(e.Entry.Text, "Content Security Policy") {
			mu.Lock()
			seen = append(seen, e.Entry.Text)
			mu.Unlock()
		}
	}); err != nil {
		p.t.Fatal(err)
	}
	p.t.Cleanup(func() {
		mu.Lock()
		defer mu.Unlock()
		for _, s := range seen {
			p.t.Errorf("CSP violation: %s", s)
		}
	})
}

// TestPhoneJoinsAndIsRevokedInBrowser: a phone opens the join link the
// coordinator's page shows, gets its token and the study; after the
// coordinator revokes it, its next sync says plainly that it must join
// again, and the record saved meanwhile stays in the outbox.
func TestPhoneJoinsAndIsRevokedInBrowser(t *testing.T) {
	ds := newDemoServer(t)
	jc, err := ds.srv.Access().NewJoinCode(demo.StudyID, access.Recorder, "test coordinator")
	if err != nil {
		t.Fatal(err)
	}
	p := page{t: t, ctx: browser(t), dir: screenshotDir(t)}
	watchCSP(p)
	// The link fills the code; the crew member gives initials (saved on
	// every record) and joins.
	p.do(chromedp.EmulateViewport(412, 915), chromedp.Navigate(ds.URL+"/#join="+jc.Code),
		chromedp.WaitVisible(chromedp.CSS(`#join-observer`)),
		chromedp.SendKeys(chromedp.CSS(`#join-observer`), "QH"+kb.Enter),
		chromedp.WaitVisible(chromedp.CSS(`#screen-cautions`)))
	if h := evalAs[string](p, `location.hash`); h != "" {
		t.Errorf("the used join code stays in the address: %q", h)
	}
	toks, err := ds.srv.Access().Tokens()
	if err != nil {
		t.Fatal(err)
	}
	var dev *access.Token
	for i := range toks {
		if toks[i].Kind == access.KindDevice {
			dev = &toks[i]
		}
	}
	if dev == nil || dev.Role != access.Recorder || len(dev.Studies) != 1 || dev.Studies[0] != demo.StudyID || !strings.HasPrefix(dev.Label, "phone-") {
		t.Fatalf("device token after joining: %+v", dev)
	}
	p.shot("phone-joined.png", false)

	// Revoked: the next sync shows the notice and the way back.
	if _, err := ds.srv.Access().Revoke(dev.ID); err != nil {
		t.Fatal(err)
	}
	// A record saved after the revoke waits in the outbox.
	// Buttons low on the screen may sit under the tab bar at this size:
	// press them from the page, as a tap on them does.
	evalAs[bool](p, `(document.getElementById("accept-cautions").click(), true)`)
	p.do(chromedp.WaitVisible(chromedp.CSS(`#tag`)),
		chromedp.SetValue(chromedp.CSS(`#tag`), "QH-0999"),
	)
	evalAs[bool](p, `(document.getElementById("capture-form").requestSubmit(), true)`)
	p.do(chromedp.WaitVisible(chromedp.CSS(`#tab-count`)),
		chromedp.Click(chromedp.CSS(`button[data-go="outbox"]`)),
		chromedp.Click(chromedp.CSS(`#sync-now`)),
		chromedp.WaitVisible(chromedp.CSS(`#revoked-banner`)))
	if txt := p.text("#revoked-banner"); !strings.Contains(txt, "new join code") || !strings.Contains(txt, "outbox") {
		t.Errorf("revoked notice: %q", txt)
	}
	if n := p.text("#outbox-count"); n != "1" {
		t.Errorf("outbox after the refused sync holds %q records, want 1", n)
	}
	p.shot("phone-revoked.png", false)
	// A new code typed by hand brings it back.
	jc2, err := ds.srv.Access().NewJoinCode(demo.StudyID, access.Recorder, "test coordinator")
	if err != nil {
		t.Fatal(err)
	}
	p.do(chromedp.Click(chromedp.CSS(`#rejoin`)), chromedp.WaitVisible(chromedp.CSS(`#join-code`)),
		chromedp.SendKeys(chromedp.CSS(`#join-code`), strings.ToLower(jc2.Code)+kb.Enter),
		chromedp.WaitVisible(chromedp.CSS(`#screen-record`)))
	if v := evalAs[bool](p, `document.getElementById("revoked-banner").hidden`); !v {
		t.Errorf("the revoked notice stays after joining again")
	}
	// Joined again, the phone sends the record that waited.
	for deadline := time.Now().Add(20 * time.Second); countCaptures(t, ds, "QH-0999") == 0 && time.Now().Before(deadline); {
		time.Sleep(50 * time.Millisecond)
	}
	if n := countCaptures(t, ds, "QH-0999"); n != 1 {
		t.Errorf("the record saved while cut off reached the server %d times, want 1", n)
	}
	all, err := ds.store.Captures(demo.StudyID, true)
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range all {
		if c.TagID == "QH-0999" && c.Observer != "QH" {
			t.Errorf("the record of the phone that joined by link names observer %q, want the initials given when joining, QH", c.Observer)
		}
	}
}

// TestAccessPageInBrowser: the coordinator makes a join code (text and
// QR image), sees the phone that joined with it and revokes it with two
// taps; the audit log lists the join.
func TestAccessPageInBrowser(t *testing.T) {
	ds := newDemoServer(t)
	p := page{t: t, ctx: browser(t), dir: screenshotDir(t)}
	watchCSP(p)
	p.signIn(ds.srv, ds.URL)
	p.show(ds.URL, "access")
	p.do(chromedp.Click(chromedp.CSS(`#make-recorder-code`)), chromedp.WaitVisible(chromedp.CSS(`#join-code-text`)))
	code := p.text("#join-code-text")
	if access.NormaliseJoinCode(code) == "" {
		t.Fatalf("join code shown: %q", code)
	}
	if w := evalAs[int](p, `document.querySelector("#join-code-out img").naturalWidth`); w < 100 {
		t.Errorf("QR image is %d px wide; it did not load (CSP?)", w)
	}
	p.shot("coord-access.png", true)
	secret, tok, err := ds.srv.Access().Join(code, "crew 3 phone")
	if err != nil || secret == "" {
		t.Fatalf("joining with the code on the page: %v", err)
	}
	p.show(ds.URL, "access")
	btn := `button[data-revoke="` + tok.ID + `"]`
	p.do(chromedp.Click(chromedp.CSS(btn)), chromedp.Click(chromedp.CSS(btn)),
		chromedp.WaitVisible(chromedp.CSS(`tr[data-token="`+tok.ID+`"] .revoked`)))
	if _, err := ds.srv.Access().Authenticate(secret); err == nil {
		t.Error("the phone revoked on the page still gets in")
	}
	p.show(ds.URL, "access")
	if txt := p.text("#audit-table"); !strings.Contains(txt, "revoke") || !strings.Contains(txt, "coordinator (browser)") {
		t.Errorf("audit log on the page lacks the revoke: %s", txt)
	}
}

func countCaptures(t *testing.T, ds *demoServer, tag string) int {
	t.Helper()
	all, err := ds.store.Captures(demo.StudyID, true)
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	for _, c := range all {
		if c.TagID == tag {
			n++
		}
	}
	return n
}
