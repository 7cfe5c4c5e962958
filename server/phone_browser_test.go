package server

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"log/slog"
	"net"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strings"
	stdsync "sync"
	"sync/atomic"
	"testing"
	"time"

	cdpbrowser "github.com/chromedp/cdproto/browser"
	"github.com/chromedp/cdproto/cdp"
	"github.com/chromedp/cdproto/emulation"
	cdppage "github.com/chromedp/cdproto/page"
	"github.com/chromedp/cdproto/storage"
	"github.com/chromedp/chromedp"
	"github.com/chromedp/chromedp/kb"

	"tagtally/capture"
	"tagtally/capture/storetest"
	"tagtally/pwa"
	"tagtally/server/access"
)

// The phone app's browser tests. The camp server listens on one loopback
// address that the test stops and starts again: a phone out of reach of
// the camp is a phone whose requests find no server. Page-level network
// emulation would not do, because it does not cover the service worker.
// http://127.0.0.1 is a secure context, so the service worker runs
// without HTTPS.

// phoneServer is a Server over a throw-away store holding phoneStudy,
// served on the same loopback address across stops and starts.
type phoneServer struct {
	t     *testing.T
	srv   *Server
	store *capture.Store
	study *capture.Study
	addr  string
	stop  func() // nil while stopped
	// failing, while set, is a path the server answers with 503 Service
	// Unavailable, as a weak camp link loses a request now and then.
	failing atomic.Pointer[string]
}

func newPhoneServer(t *testing.T) *phoneServer {
	t.Helper()
	store := storetest.Open(t)
	st := phoneStudy(time.Now())
	if err := store.CreateStudy(st); err != nil {
		t.Fatal(err)
	}
	// A free port, chosen once: the phone knows the camp server by its
	// address, so it must come back on the same one.
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := ln.Addr().String()
	if err := ln.Close(); err != nil {
		t.Fatal(err)
	}
	cfg := DefaultConfig()
	cfg.Addr = addr
	// The browser keeps spare connections open that have sent no request
	// yet; a graceful shutdown counts them as busy until they are 5 s old
	// (net/http), so stopping the server right after the phone used it can
	// take that long.
	cfg.ShutdownTimeout = 10 * time.Second
	cfg.Logger = slog.New(slog.NewTextHandler(io.Discard, nil))
	srv, err := New(store, cfg)
	if err != nil {
		t.Fatal(err)
	}
	ps := &phoneServer{t: t, srv: srv, store: store, study: st, addr: addr}
	ps.start()
	t.Cleanup(func() {
		if ps.stop != nil {
			ps.stop()
		}
	})
	return ps
}

func (ps *phoneServer) url() string { return "http://" + ps.addr }

// start serves on the server's address until stop is called.
func (ps *phoneServer) start() {
	ps.t.Helper()
	ln, err := net.Listen("tcp", ps.addr)
	if err != nil {
		ps.t.Fatalf("the camp server cannot listen on %s again: %v", ps.addr, err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	app := ps.srv.Handler()
	h := http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if f := ps.failing.Load(); f != nil && r.URL.Path == *f {
			http.Error(w, "lost on the way", http.StatusServiceUnavailable)
			return
		}
		app.ServeHTTP(w, r)
	})
	go func() { done <- ps.srv.ServeHandler(ctx, ln, h) }()
	ps.stop = func() {
		ps.stop = nil
		cancel()
		if err := <-done; err != nil {
			ps.t.Errorf("stopping the camp server: %v", err)
		}
	}
}

// hangingListener takes connections on addr and never answers, like a
// camp server whose laptop has gone to sleep; the returned func closes it
// and every connection it took.
func hangingListener(t *testing.T, addr string) func() {
	t.Helper()
	ln, err := net.Listen("tcp", addr)
	if err != nil {
		t.Fatal(err)
	}
	var mu stdsync.Mutex
	var conns []net.Conn
	done := make(chan struct{})
	go func() {
		defer close(done)
		for {
			c, err := ln.Accept()
			if err != nil {
				return
			}
			mu.Lock()
			conns = append(conns, c)
			mu.Unlock()
		}
	}()
	closed := false
	stop := func() {
		if closed {
			return
		}
		closed = true
		ln.Close()
		<-done
		mu.Lock()
		defer mu.Unlock()
		for _, c := range conns {
			c.Close()
		}
	}
	t.Cleanup(stop)
	return stop
}

// phoneStudy is an invented live-trapping grid whose third daily occasion
// window holds now, so records made during the test belong to an
// occasion. Its stations have coordinates, so the app can offer the
// nearest one first.
func phoneStudy(now time.Time) *capture.Study {
	st := storetest.Study()
	st.ID = "carrow-heath-2026"
	st.Name = "Carrow Heath grid"
	st.TargetSpecies = []string{"bank vole", "wood mouse"}
	st.Measurements = []capture.MeasurementSpec{{Name: "hind foot", Unit: "mm"}}
	st.PermitRef = "CH-2026-07 (invented)"
	base := now.Add(-49 * time.Hour).Truncate(time.Second)
	st.CreatedAt = base.Add(-24 * time.Hour)
	for i := range st.Occasions {
		s := base.Add(time.Duration(i) * 24 * time.Hour)
		st.Occasions[i].Start, st.Occasions[i].End = s, s.Add(23*time.Hour)
	}
	for i := range st.Stations {
		lat, lon := 52.6100+0.0003*float64(i/2), 1.3500+0.0005*float64(i%2)
		st.Stations[i].Lat, st.Stations[i].Lon = &lat, &lon
	}
	return st
}

// phone is one phone: a browser on its own profile with the app open.
type phone struct {
	page
	base string
}

// openPhone starts a browser on profile with a width x height phone
// screen (mobile emulation), allows it the GPS position pos (lat, lon)
// and opens the app at base.
func openPhone(t *testing.T, profile, base string, width, height int64, pos [2]float64) phone {
	t.Helper()
	p := phone{page: page{t: t, ctx: browserWithProfile(t, profile), dir: screenshotDir(t)}, base: base}
	p.page.do(chromedp.EmulateViewport(width, height, chromedp.EmulateMobile, chromedp.EmulatePortrait))
	if _, err := chromedp.CallBrowser(p.ctx, cdpbrowser.SetPermission, cdpbrowser.SetPermissionParams{
		Permission: &cdpbrowser.PermissionDescriptor{Name: "geolocation"}, Setting: cdpbrowser.PermissionSettingGranted, Origin: base,
	}); err != nil {
		t.Fatalf("granting the GPS position: %v", err)
	}
	acc := 6.0
	if _, err := chromedp.Call(p.ctx, emulation.SetGeolocationOverride, emulation.SetGeolocationOverrideParams{
		Latitude: &pos[0], Longitude: &pos[1], Accuracy: &acc,
	}); err != nil {
		t.Fatalf("setting the GPS position: %v", err)
	}
	p.do(chromedp.Navigate(base + "/"))
	return p
}

// do runs steps with a time limit, and on failure says what the page
// shows. (The browser's lifetime is bound to the context of its first
// action, which openPhone runs without this limit.)
func (p phone) do(steps ...chromedp.Action[chromedp.Void]) {
	p.t.Helper()
	ctx, cancel := context.WithTimeout(p.ctx, 20*time.Second)
	defer cancel()
	if err := chromedp.Do(ctx, steps...); err != nil {
		p.t.Fatalf("%v\npage shows:\n%s", err, p.shows())
	}
}

// shows is the text of the page, for failure messages.
func (p phone) shows() string {
	ctx, cancel := context.WithTimeout(p.ctx, 3*time.Second)
	defer cancel()
	body, err := chromedp.Run(ctx, chromedp.Evaluate[string](`document.body ? document.body.innerText : ""`))
	if err != nil {
		return fmt.Sprintf("(cannot read the page: %v)", err)
	}
	return body
}

// close closes the whole browser, as when the crew closes the app or the
// phone switches off; the profile folder keeps what the browser stored.
func (p phone) close() {
	p.t.Helper()
	if err := chromedp.Cancel(p.ctx); err != nil {
		p.t.Fatalf("closing the browser: %v", err)
	}
}

// wait polls the page until expr is true, failing the test after 20 s with
// what the page shows.
func (p phone) wait(expr string) {
	p.t.Helper()
	p.waitUpTo(expr, 20*time.Second)
}

// waitUpTo is wait with its own time limit.
func (p phone) waitUpTo(expr string, limit time.Duration) {
	p.t.Helper()
	if err := p.poll(expr, limit); err != nil {
		p.t.Fatalf("waiting for %s: %v\npage shows:\n%s", expr, err, p.shows())
	}
}

// poll polls the page until expr is true or limit has passed.
func (p phone) poll(expr string, limit time.Duration) error {
	_, err := chromedp.Run(p.ctx, chromedp.Poll[bool](expr, chromedp.WithPollingInterval(50*time.Millisecond), chromedp.WithPollingTimeout(limit)))
	return err
}

// await evaluates expr, waiting for the promise it gives.
func await[T any](p phone, expr string) T {
	p.t.Helper()
	v, err := chromedp.Run(p.ctx, chromedp.Evaluate[T](expr, chromedp.EvalAwaitPromise))
	if err != nil {
		p.t.Fatalf("%s: %v", expr, err)
	}
	return v
}

// joinCode makes a single-use recorder join code for the study, as the
// coordinator's Access page does.
func (ps *phoneServer) joinCode() string {
	ps.t.Helper()
	jc, err := ps.srv.Access().NewJoinCode(ps.study.ID, access.Recorder, "test coordinator")
	if err != nil {
		ps.t.Fatal(err)
	}
	return jc.Code
}

// join joins the camp server with the coordinator's join code as a crew
// member does (byLink: opens the join link, as scanning its QR code does;
// else types the code on the join screen), gives the crew member's
// initials and accepts the handling cautions.
func (p phone) join(code, observer string, byLink bool) {
	p.t.Helper()
	p.joinScreen(code, byLink)
	p.submitJoin(observer)
	p.acceptCautions()
}

// joinScreen waits for the join screen with the code in its box: opened
// from the join link, or typed.
func (p phone) joinScreen(code string, byLink bool) {
	p.t.Helper()
	if byLink {
		// A fresh page, as the camera opens the link: a change of the
		// address's #part alone does not reload the page.
		p.do(chromedp.Navigate("about:blank"), chromedp.Navigate(p.base+"/#join="+code))
	}
	p.wait(`(() => { const s = document.getElementById("screen-enrol"); return s !== null && !s.hidden; })()`)
	if !byLink {
		p.do(chromedp.SendKeys(chromedp.ID("join-code"), code))
	}
	if got := evalAs[string](p.page, `document.getElementById("join-code").value`); got != code {
		p.t.Fatalf("join code box holds %q, want %q", got, code)
	}
	if h := evalAs[string](p.page, `location.hash`); h != "" {
		p.t.Errorf("the join code stays in the address: %q", h)
	}
}

// submitJoin gives the initials on the join screen and presses Join; the
// cautions screen follows.
func (p phone) submitJoin(observer string) {
	p.t.Helper()
	p.do(chromedp.SendKeys(chromedp.ID("join-observer"), observer))
	p.click("#join-submit")
	p.wait(`!document.getElementById("screen-cautions").hidden`)
}

// acceptCautions checks the cautions screen and accepts it.
func (p phone) acceptCautions() {
	p.t.Helper()
	if text := p.text("#screen-cautions"); !strings.Contains(text, "permits") || !strings.Contains(text, "CH-2026-07") {
		p.t.Errorf("cautions screen does not show the permit cautions and the study's permit: %q", text)
	}
	p.click("#accept-cautions")
	p.wait(`!document.getElementById("screen-record").hidden`)
}

// deviceTokens lists the server's phone tokens.
func (ps *phoneServer) deviceTokens() []access.Token {
	ps.t.Helper()
	all, err := ps.srv.Access().Tokens()
	if err != nil {
		ps.t.Fatal(err)
	}
	var out []access.Token
	for _, tok := range all {
		if tok.Kind == access.KindDevice {
			out = append(out, tok)
		}
	}
	return out
}

// waitServiceWorker waits until the service worker controls the page and
// its cache holds every file of the shell.
func (p phone) waitServiceWorker() {
	p.t.Helper()
	// Installing fetches and caches the whole shell: a minute leaves room
	// on a loaded 2-core machine (alone it takes 2-4 s). The time-outs seen
	// in full-suite runs were a page the active worker never claimed,
	// which the app now asks it to do; the report below tells such a case
	// from a slow or failed install.
	const controlled = `navigator.serviceWorker.controller !== null && navigator.serviceWorker.controller.state === "activated"`
	if err := p.poll(controlled, time.Minute); err != nil {
		// Say what the browser did with the worker: never registered,
		// still installing, or an install that failed (no worker left).
		state := await[string](p, `navigator.serviceWorker.getRegistration().then((r) => r ? JSON.stringify({
			installing: r.installing && r.installing.state, waiting: r.waiting && r.waiting.state, active: r.active && r.active.state,
			controller: navigator.serviceWorker.controller && navigator.serviceWorker.controller.state }) : "no registration")`)
		p.t.Fatalf("the service worker did not take control within a minute: %v; registration: %s\npage shows:\n%s", err, state, p.shows())
	}
	cached := await[[]string](p, `caches.keys()
		.then((ks) => caches.open(ks.find((k) => k.startsWith("tagtally-shell-"))))
		.then((c) => c.keys()).then((rs) => rs.map((r) => new URL(r.url).pathname))`)
	sort.Strings(cached)
	if want := shellFiles(p.t); !slices.Equal(cached, want) {
		p.t.Fatalf("service worker cache holds %v, want the shell %v", cached, want)
	}
}

// shellFiles is the service worker's list of shell files, sorted.
func shellFiles(t *testing.T) []string {
	t.Helper()
	files, err := pwa.ShellFiles()
	if err != nil {
		t.Fatal(err)
	}
	return files
}

// entry is one capture as the crew enters it on the form.
type entry struct {
	tag    string
	pick   string // typed instead of tag: the tag is then chosen from the type-ahead suggestions
	event  string // tapped; "" keeps what the app chose from the tag
	oldTag string // for a retag
	status string // what the app must say about the tag: new, recapture, dead, unmarked
	// offSeries: the tag matches none of the study's tag series
	// (storetest.Study: BF- and four digits), which the app must point out
	// under the status without refusing the record.
	offSeries bool
	species   string // chosen on the species list; "" keeps the last one
	station   string // station ID chosen on the station list; "" keeps the last one
	sex       string
	age       string
	mass      string
	foot      string // hind foot, mm
	notes     string
}

// record enters e through the form, saves it and waits until the outbox
// holds n records.
func (p phone) record(e entry, n int) {
	p.t.Helper()
	if e.pick != "" {
		p.do(chromedp.SendKeys(chromedp.ID("tag"), e.pick))
		find := fmt.Sprintf(`Array.from(document.querySelectorAll("#tag-suggestions button"), (b) => b.textContent).indexOf(%q)`, e.tag)
		p.wait(find + ` >= 0`)
		p.click(fmt.Sprintf(`#tag-suggestions button:nth-child(%d)`, evalAs[int](p.page, find)+1))
	} else {
		p.do(chromedp.SendKeys(chromedp.ID("tag"), e.tag))
	}
	p.wait(fmt.Sprintf(`document.getElementById("tag").value === %q && document.getElementById("tag-status").classList.contains(%q)`, e.tag, e.status))
	warning := evalAs[string](p.page, `(document.querySelector("#tag-status .tag-warning") || {textContent: ""}).textContent`)
	if e.offSeries != strings.Contains(warning, "does not match the study's tag format") {
		p.t.Errorf("tag %s: the app warns %q; want a warning that it is outside the study's series: %v", e.tag, warning, e.offSeries)
	}
	if e.event != "" {
		p.tap("event", e.event)
	}
	if e.event == "retag" {
		p.do(chromedp.WaitVisible(chromedp.ID("old-tag")), chromedp.SendKeys(chromedp.ID("old-tag"), e.oldTag))
	}
	if e.species != "" {
		p.choose("species", e.species)
	}
	if e.station != "" {
		p.choose("station", e.station)
	}
	if e.sex != "" {
		p.tap("sex", e.sex)
	}
	if e.age != "" {
		p.tap("age", e.age)
	}
	if e.mass != "" {
		p.do(chromedp.SendKeys(chromedp.ID("mass"), e.mass))
	}
	if e.foot != "" {
		p.do(chromedp.SendKeys(chromedp.ID("m-hind-foot"), e.foot))
	}
	if e.notes != "" {
		p.do(chromedp.SendKeys(chromedp.ID("notes"), e.notes))
	}
	p.click("#save")
	p.wait(fmt.Sprintf(`document.getElementById("tab-count").textContent === "%d" && document.getElementById("tag").value === ""`, n))
}

// erase deletes what the field id holds with the backspace key.
func (p phone) erase(id string) {
	p.t.Helper()
	n := evalAs[int](p.page, fmt.Sprintf(`document.getElementById(%q).value.length`, id))
	p.do(chromedp.Focus(chromedp.ID(id)), chromedp.KeyEvent(strings.Repeat(kb.End, 1)+strings.Repeat(kb.Backspace, n)))
	if v := evalAs[string](p.page, fmt.Sprintf(`document.getElementById(%q).value`, id)); v != "" {
		p.t.Fatalf("erasing %s left %q", id, v)
	}
}

// choose picks value on the list id with the arrow keys, as on a phone's
// keyboard or a laptop's. (Typing an option's name would open the list at
// its first space, and a list that is open cannot be driven headless.)
func (p phone) choose(id, value string) {
	p.t.Helper()
	steps := evalAs[int](p.page, fmt.Sprintf(`(() => { const s = document.getElementById(%q);
		return Array.from(s.options).findIndex((o) => o.value === %q) - s.selectedIndex; })()`, id, value))
	key := kb.ArrowDown
	if steps < 0 {
		key, steps = kb.ArrowUp, -steps
	}
	p.do(chromedp.Focus(chromedp.ID(id)), chromedp.KeyEvent(strings.Repeat(key, steps)))
	if got := evalAs[string](p.page, fmt.Sprintf(`document.getElementById(%q).value`, id)); got != value {
		p.t.Fatalf("choosing %q on the list %s chose %q", value, id, got)
	}
}

// tap taps the choice value of the radio group name on its visible box,
// as a finger does, and checks that it took.
func (p phone) tap(name, value string) {
	p.t.Helper()
	p.click(fmt.Sprintf(`input[name=%q][value=%q] + span`, name, value))
	if got := evalAs[string](p.page, fmt.Sprintf(`document.querySelector('input[name=%q]:checked').value`, name)); got != value {
		p.t.Fatalf("tapping %s %q left %q chosen", name, value, got)
	}
}

// click taps the element sel as a finger does: it scrolls the element to
// the middle of the screen, checks that nothing (the header, the tab bar,
// a message) covers its centre, and clicks there.
func (p phone) click(sel string) {
	p.t.Helper()
	covered := evalAs[string](p.page, fmt.Sprintf(`(() => {
		const el = document.querySelector(%q);
		if (!el) return "not found";
		el.scrollIntoView({ block: "center", inline: "nearest" });
		const r = el.getBoundingClientRect();
		const hit = document.elementFromPoint(r.x + r.width / 2, r.y + r.height / 2);
		if (hit && (hit === el || el.contains(hit) || hit.contains(el) && hit.tagName === "LABEL")) return "";
		return hit ? "covered by " + hit.tagName.toLowerCase() + (hit.id ? "#" + hit.id : "") + "." + hit.className : "off the screen";
	})()`, sel))
	if covered != "" {
		p.t.Fatalf("cannot tap %s: %s", sel, covered)
	}
	p.do(chromedp.Click(chromedp.CSS(sel)))
}

// phoneCapture is what the test reads back from the phone's IndexedDB.
type phoneCapture struct {
	ID       string  `json:"id"`
	TagID    string  `json:"tag_id"`
	OldTagID string  `json:"old_tag_id"`
	Event    string  `json:"event"`
	Observer string  `json:"observer"`
	Device   string  `json:"device"`
	Station  string  `json:"station_id"`
	Lat      float64 `json:"lat"`
}

// stored reads the phone's stored records (store "captures" or "outbox").
func (p phone) stored(storeName string) []phoneCapture {
	p.t.Helper()
	return await[[]phoneCapture](p, fmt.Sprintf(`new Promise((resolve, reject) => {
		const r = indexedDB.open("tagtally");
		r.onerror = () => reject(r.error);
		r.onsuccess = () => {
			const q = r.result.transaction(%[1]q).objectStore(%[1]q).getAll();
			q.onerror = () => reject(q.error);
			q.onsuccess = () => { r.result.close(); resolve(q.result.map((x) => x.body || x)); };
		};
	})`, storeName))
}

// fieldDay is the 20 records of the offline test: 14 new marks (one with
// a digit of its tag dropped, outside the study's tag series), a
// recapture typed in full, one picked from the type-ahead by its digits, a
// retag, a recapture of the new tag of the retagged animal, a resight and a
// dead recovery.
var fieldDay = func() []entry {
	var es []entry
	for i := 1; i <= 14; i++ {
		e := entry{tag: fmt.Sprintf("BF-%04d", i), status: "new", sex: []string{"female", "male"}[i%2], age: "adult",
			mass: fmt.Sprintf("%d.%d", 18+i%7, i%10), foot: "17.5"}
		switch i {
		case 1:
			e.station = "A1" // the nearest is offered first; the crew chooses
		case 6:
			e.station, e.species, e.age = "B2", "wood mouse", "juvenile"
		case 11:
			e.species = "bank vole"
		case 13:
			e.tag, e.offSeries = "BF-013", true // a digit dropped in typing
		}
		es = append(es, e)
	}
	return append(es,
		entry{tag: "BF-0003", status: "recapture", mass: "22.5", notes: "ear notch healed"},
		entry{tag: "BF-0012", pick: "12", status: "recapture", mass: "20"},
		entry{tag: "BF-0101", status: "new", event: "retag", oldTag: "BF-0005", notes: "old tag torn"},
		entry{tag: "BF-0101", status: "recapture", station: "B1"},
		entry{tag: "BF-0007", status: "recapture", event: "resight"},
		entry{tag: "BF-0009", status: "recapture", event: "dead", notes: "found in trap"},
	)
}()

// TestPhoneAppOfflineInBrowser is the field day of issue 6: the app is
// loaded while the camp server answers, the service worker installs, the
// server stops, the app reloads from its cache, 20 records are entered
// through the form (a recapture, a retag among them), the browser is
// closed and opened again with the server still gone, then the server
// comes back on the same address, the outbox is sent and the server holds
// all 20 exactly once. A second phone then joins and knows the first
// phone's tags in its type-ahead.
func TestPhoneAppOfflineInBrowser(t *testing.T) {
	ps := newPhoneServer(t)
	t0 := time.Now()
	mark := func(what string) { t.Logf("%5.1f s %s", time.Since(t0).Seconds(), what) }
	profile := t.TempDir()
	nearB1 := [2]float64{52.6103, 1.3500} // station B1's position
	p := openPhone(t, profile, ps.url(), 360, 740, nearB1)
	// The crew member types the join code the coordinator shows.
	p.join(ps.joinCode(), "JW", false)
	devs := ps.deviceTokens()
	if len(devs) != 1 || devs[0].Role != access.Recorder || len(devs[0].Studies) != 1 || devs[0].Studies[0] != ps.study.ID {
		t.Fatalf("after the first phone joined the server has the phone tokens %+v, want one recorder token for %s", devs, ps.study.ID)
	}
	phoneToken := devs[0]
	p.waitServiceWorker()
	// Nearest station first, from the GPS position.
	p.wait(`document.getElementById("station").options.length === 5 && document.getElementById("station").options[1].value === "B1"`)

	mark("service worker installed")
	ps.stop() // out of reach of the camp
	mark("server stopped")
	p.do(chromedp.Reload(), chromedp.WaitVisible(chromedp.ID("capture-form")))
	if got := p.text("#study-name"); got != ps.study.Name {
		t.Errorf("offline reload shows study %q, want %q", got, ps.study.Name)
	}
	p.wait(`document.getElementById("gps-line").textContent.startsWith("Position: 52.61")`)
	for i, e := range fieldDay {
		p.record(e, i+1)
	}
	mark("20 records saved offline")
	// The recapture's form said what the animal was last time before it
	// was saved; the retag links the old tag to the new one.
	if got := evalAs[string](p.page, `document.querySelector('input[name="event"]:checked').value`); got != "new" {
		t.Errorf("the form is not ready for a new record: event %q", got)
	}
	p.do(chromedp.SendKeys(chromedp.ID("tag"), "BF-0005"))
	p.wait(`document.getElementById("tag-status").classList.contains("recapture")`)
	if status := p.text("#tag-status"); !strings.Contains(status, "station trap B1") {
		t.Errorf("the old tag of a retagged animal does not show the animal's last record (at trap B1): %q", status)
	}
	p.erase("tag")

	// Close the browser and open it again: the records are on the phone,
	// and so is an entry the crew had begun but not saved.
	p.do(chromedp.SendKeys(chromedp.ID("tag"), "BF-0200"), chromedp.SendKeys(chromedp.ID("mass"), "19.5"))
	p.close()
	mark("browser closed")
	// The phone opens the app where the camp server's address takes
	// connections but nothing answers (a laptop asleep, a server hung):
	// the app must open from its cache all the same.
	hang := hangingListener(t, ps.addr)
	p = openPhone(t, profile, ps.url(), 360, 740, nearB1)
	p.wait(`!document.getElementById("screen-record").hidden`)
	mark("browser reopened")
	p.wait(`document.getElementById("tag").value === "BF-0200" && document.getElementById("mass").value === "19.5"`)
	p.erase("tag")
	p.erase("mass")
	p.click(`.tabs button[data-go="today"]`)
	p.wait(`!document.getElementById("screen-today").hidden`)
	p.wait(`document.getElementById("today-count").textContent.startsWith("20 records today")`)
	if n := evalAs[int](p.page, `document.querySelectorAll("#today-list li").length`); n != 20 {
		t.Errorf("after reopening, Today lists %d records, want 20", n)
	}
	p.click(`.tabs button[data-go="outbox"]`)
	p.wait(`!document.getElementById("screen-outbox").hidden`)
	if got := p.text("#outbox-count"); got != "20" {
		t.Errorf("after reopening, the outbox holds %s records, want 20", got)
	}
	onPhone := p.stored("captures")
	if waiting := p.stored("outbox"); len(onPhone) != 20 || len(waiting) != 20 {
		t.Fatalf("the phone holds %d records and %d in the outbox, want 20 and 20", len(onPhone), len(waiting))
	}
	p.click("#sync-now")
	p.wait(`document.getElementById("sync-message").textContent.includes("does not answer")`)
	hang()

	// Back in camp: the server answers on the same address.
	ps.start()
	mark("server started")
	p.click("#sync-now")
	p.wait(`document.getElementById("outbox-count").textContent === "0"`)
	if msg := p.text("#sync-message"); !strings.HasPrefix(msg, "Sent 20") {
		t.Errorf("sync message %q, want it to say 20 were sent", msg)
	}
	if left := p.stored("outbox"); len(left) != 0 {
		t.Errorf("%d records left in the outbox after sync", len(left))
	}
	mark("synced")
	checkServerHolds(t, ps, onPhone)
	// The mistyped tag was stored as sent; the coordinator's data checks
	// list it.
	checks, err := ps.store.Checks(ps.study.ID)
	if err != nil {
		t.Fatal(err)
	}
	if i := slices.IndexFunc(checks, func(c capture.Check) bool { return c.Code == capture.CheckTagSeries }); i < 0 || !slices.Equal(checks[i].Tags, []string{"BF-013"}) {
		t.Errorf("data checks after the sync: %+v; want tag_outside_series for BF-013", checks)
	}
	// The phone sent them with the token it joined with, kept through the
	// closed browser and the server's restart: no second join, no refusal.
	if devs := ps.deviceTokens(); len(devs) != 1 || devs[0].ID != phoneToken.ID || devs[0].Revoked != nil {
		t.Errorf("after the sync the phone tokens are %+v, want only the first phone's %s, unrevoked", devs, phoneToken.ID)
	}
	if phoneToken.Label != onPhone[0].Device {
		t.Errorf("the phone joined as %q but its records name device %q", phoneToken.Label, onPhone[0].Device)
	}
	// guard writes a request's audit entry after the answer has gone,
	// so the phone may have its answer before the entry is there.
	pushes, refused := 0, 0
	for deadline := time.Now().Add(10 * time.Second); pushes == 0 && time.Now().Before(deadline); time.Sleep(50 * time.Millisecond) {
		audit, err := ps.srv.Access().Audit(access.MaxAuditPage, 0)
		if err != nil {
			t.Fatal(err)
		}
		pushes, refused = 0, 0
		for _, e := range audit {
			if e.TokenID == phoneToken.ID && e.Route == "/api/v1/sync/push" {
				if e.Status == http.StatusOK {
					pushes++
				} else {
					refused++
				}
			}
		}
	}
	if pushes == 0 || refused != 0 {
		t.Errorf("audit log: %d pushes answered 200 and %d refused with the first phone's token, want some and none", pushes, refused)
	}

	// A second press sends nothing new, and the server still holds 20.
	p.click("#sync-now")
	p.wait(`document.getElementById("sync-message").textContent.startsWith("Sent 0")`)
	checkServerHolds(t, ps, onPhone)
	if got := p.text("#sync-pill"); !strings.HasPrefix(got, "Synced") {
		t.Errorf("sync pill says %q after sync", got)
	}

	// A second phone joins and pulls: the first phone's tags are in its
	// type-ahead, and a tag marked there is a recapture here.
	mark("second phone")
	q := openPhone(t, t.TempDir(), ps.url(), 360, 740, nearB1)
	// This crew member scans the join code's QR code: the join link.
	q.join(ps.joinCode(), "MH", true)
	if devs := ps.deviceTokens(); len(devs) != 2 {
		t.Errorf("after the second phone joined the server has %d phone tokens, want 2", len(devs))
	}
	q.wait(`document.getElementById("last-sync").textContent !== "never"`)
	q.do(chromedp.SendKeys(chromedp.ID("tag"), "BF-00"))
	q.wait(`document.querySelectorAll("#tag-suggestions button").length === 6`)
	chips := evalAs[[]string](q.page, `Array.from(document.querySelectorAll("#tag-suggestions button"), (b) => b.textContent)`)
	if want := []string{"BF-0001", "BF-0002", "BF-0003", "BF-0004", "BF-0005", "BF-0006"}; !slices.Equal(chips, want) {
		t.Errorf("second phone suggests %v for BF-00, want %v", chips, want)
	}
	q.erase("tag")
	// With the server answering, a saved record is sent by itself.
	q.record(entry{tag: "BF-0101", pick: "0101", status: "recapture", station: "A2", mass: "23"}, 1)
	q.wait(`document.getElementById("outbox-count").textContent === "0" && document.getElementById("tab-count").hidden`)
	mark("second phone's record sent")
	all, err := ps.store.Captures(ps.study.ID, true)
	if err != nil || len(all) != 21 {
		t.Errorf("after the second phone's record the server holds %d records (%v), want 21", len(all), err)
	}
	// The second phone's record carries the initials given when joining
	// and that phone's name.
	second := 0
	for _, c := range all {
		if c.Observer == "MH" {
			second++
			if c.TagID != "BF-0101" || c.Device == "" || c.Device == phoneToken.Label {
				t.Errorf("the second phone's record: tag %s, device %q (the first phone is %q)", c.TagID, c.Device, phoneToken.Label)
			}
		}
	}
	if second != 1 {
		t.Errorf("the server holds %d records by MH, want the second phone's 1", second)
	}
}

// checkServerHolds checks that the server holds exactly the phone's records,
// each once and in one version, with the fields the crew entered.
func checkServerHolds(t *testing.T, ps *phoneServer, onPhone []phoneCapture) {
	t.Helper()
	all, err := ps.store.Captures(ps.study.ID, true)
	if err != nil {
		t.Fatal(err)
	}
	eng, err := ps.srv.engine()
	if err != nil {
		t.Fatal(err)
	}
	byID := map[string]capture.Capture{}
	for _, c := range all {
		byID[c.ID] = c
	}
	if len(all) != len(onPhone) || len(byID) != len(onPhone) {
		t.Errorf("server holds %d records (%d IDs), the phone made %d", len(all), len(byID), len(onPhone))
	}
	events := map[capture.Event]int{}
	for _, pc := range onPhone {
		c, ok := byID[pc.ID]
		if !ok {
			t.Errorf("record %s (%s) is not on the server", pc.ID, pc.TagID)
			continue
		}
		events[c.Event]++
		if c.TagID != pc.TagID || string(c.Event) != pc.Event || c.OldTagID != pc.OldTagID || c.Observer != "JW" || c.Device != pc.Device || c.Device == "" {
			t.Errorf("server's %s: tag %s event %s old %q observer %q device %q; phone's: %+v", c.ID, c.TagID, c.Event, c.OldTagID, c.Observer, c.Device, pc)
		}
		// The time the phone recorded falls in occasion 3, whose window
		// holds the test's now; the position is the phone's GPS fix.
		if occ := ps.study.OccasionAt(c.CapturedAt); occ != 3 || c.Lat == nil || pc.Lat == 0 || *c.Lat != pc.Lat {
			t.Errorf("server's %s: captured at %s (occasion %d), latitude %v; want occasion 3 and the phone's GPS fix %v", c.ID, c.CapturedAt, occ, c.Lat, pc.Lat)
		}
		h, err := eng.History(ps.study.ID, c.ID)
		if err != nil || len(h.Revisions) != 1 || h.Conflict {
			t.Errorf("server's %s has %d revisions (conflict %v, %v), want one", c.ID, len(h.Revisions), h != nil && h.Conflict, err)
		}
	}
	retagged := false
	for _, c := range all {
		retagged = retagged || c.Event == capture.EventRetag && c.OldTagID == "BF-0005" && c.TagID == "BF-0101"
	}
	if !retagged {
		t.Errorf("server holds no retag of BF-0005 to BF-0101")
	}
	want := map[capture.Event]int{capture.EventNewMark: 14, capture.EventRecapture: 3, capture.EventRetag: 1, capture.EventResight: 1, capture.EventDeadRecovery: 1}
	for ev, n := range want {
		if events[ev] != n {
			t.Errorf("server holds %d %s records, want %d (all: %v)", events[ev], ev, n, events)
		}
	}
}

// TestPhoneAppRetriesOfflineSetupInBrowser follows a first visit on a weak
// camp link: one file of the app does not arrive, so the browser drops the
// service worker it was installing and the app could not open away from
// the Wi-Fi. The app says so (a banner, and a line on the Outbox screen);
// once the file arrives it sets itself up at its next contact with the
// server, without being reopened, and says it is ready.
func TestPhoneAppRetriesOfflineSetupInBrowser(t *testing.T) {
	ps := newPhoneServer(t)
	icon := "/icons/icon-512.png" // one of the files the worker keeps
	ps.failing.Store(&icon)
	p := openPhone(t, t.TempDir(), ps.url(), 360, 740, [2]float64{52.61, 1.35})
	p.join(ps.joinCode(), "JW", true)
	// The install fails and the browser keeps no worker.
	for deadline := time.Now().Add(20 * time.Second); ; time.Sleep(100 * time.Millisecond) {
		if await[bool](p, `navigator.serviceWorker.getRegistration().then((r) => !r)`) {
			break
		}
		if time.Now().After(deadline) {
			t.Fatal("the browser still has a service worker although one of its files never arrived")
		}
	}
	if !evalAs[bool](p.page, `navigator.serviceWorker.controller === null && !document.getElementById("offline-banner").hidden`) {
		t.Fatal("without a service worker the app does not say it is not ready to work with no network")
	}
	p.checkLayout("record (not ready offline)", 320, 360)
	p.shot("phone-not-ready-360x740.png", false)
	p.click(`.tabs button[data-go="outbox"]`)
	p.wait(`!document.getElementById("screen-outbox").hidden`)
	if got := p.text("#offline-state"); !strings.HasPrefix(got, "not yet") {
		t.Errorf("the Outbox screen says %q for working with no network, want not yet", got)
	}
	// The link recovers; the next sync also sets the app up again.
	ps.failing.Store(nil)
	p.click("#sync-now")
	p.waitServiceWorker()
	p.wait(`document.getElementById("offline-banner").hidden && document.getElementById("offline-state").textContent.startsWith("yes")`)

	// A page the active worker does not control (here a reload that
	// bypasses it, as Shift+Reload does; in the field, a page that loaded
	// while the worker was activating) is ready all the same, and asks
	// the worker to take it over.
	ignoreCache := true
	if _, err := chromedp.Call(p.ctx, cdppage.Reload, cdppage.ReloadParams{IgnoreCache: &ignoreCache}); err != nil {
		t.Fatal(err)
	}
	p.do(chromedp.WaitVisible(chromedp.ID("tag")))
	p.waitServiceWorker()
	p.wait(`document.getElementById("offline-banner").hidden`)
}

// TestPhoneAppWithoutServiceWorkerInBrowser opens the app where the
// browser offers no service worker (as over plain HTTP from another
// machine, e.g. a camp server run with --no-tls; here the browser's
// serviceWorker is removed before the app's scripts run): the banner says
// that waiting will not help and where to open the app instead.
func TestPhoneAppWithoutServiceWorkerInBrowser(t *testing.T) {
	ps := newPhoneServer(t)
	p := openPhone(t, t.TempDir(), ps.url(), 360, 740, [2]float64{52.61, 1.35})
	if _, err := chromedp.Call(p.ctx, cdppage.AddScriptToEvaluateOnNewDocument, cdppage.AddScriptToEvaluateOnNewDocumentParams{
		Source: `delete Navigator.prototype.serviceWorker;`,
	}); err != nil {
		t.Fatal(err)
	}
	p.do(chromedp.Reload())
	p.wait(`!("serviceWorker" in navigator) && !document.getElementById("offline-banner").hidden`)
	if got := p.text("#offline-banner"); !strings.Contains(got, "https address") {
		t.Errorf("the banner says %q, want where to open the app instead", got)
	}
	if got := evalAs[string](p.page, `document.getElementById("offline-state").textContent`); !strings.HasPrefix(got, "no:") {
		t.Errorf("the Outbox line says %q, want no", got)
	}
}

// TestPhoneAppInstallableInBrowser asks Chromium itself whether the app
// can be installed to the home screen once its service worker runs: the
// manifest must parse without errors and Page.getInstallabilityErrors
// must list none.
func TestPhoneAppInstallableInBrowser(t *testing.T) {
	ps := newPhoneServer(t)
	p := openPhone(t, t.TempDir(), ps.url(), 360, 740, [2]float64{52.61, 1.35})
	p.join(ps.joinCode(), "JW", true)
	p.waitServiceWorker()
	man, err := chromedp.Call(p.ctx, cdppage.GetAppManifest, cdppage.GetAppManifestParams{})
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range man.Errors {
		t.Errorf("manifest error: %s (line %d)", e.Message, e.Line)
	}
	if man.Manifest == nil || !strings.HasSuffix(man.URL, "/manifest.webmanifest") {
		t.Errorf("Chromium found no manifest (url %q)", man.URL)
	}
	inst, err := chromedp.Call(p.ctx, cdppage.GetInstallabilityErrors, cdp.Empty{})
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range inst.InstallabilityErrors {
		var args []string
		for _, a := range e.ErrorArguments {
			args = append(args, a.Name+"="+a.Value)
		}
		t.Errorf("not installable: %s %v", e.ErrorID, args)
	}
}

// layoutCheck lists what a crew member would find wrong on the screen as
// shown, at the window's width: anything reaching past the screen's edges
// (or a page wider than the screen), an element shown although marked
// hidden, a touch target smaller than 48 x 48
// CSS px, a field without a label, and text whose contrast with its
// background is below minContrast (WCAG 2 contrast ratio). It also gives
// the lowest contrast found. Hidden elements are skipped.
const layoutCheck = `((minContrast) => {
	const W = document.documentElement.clientWidth;
	const problems = [];
	const name = (el) => el.tagName.toLowerCase() + (el.id ? "#" + el.id : "") +
		(typeof el.className === "string" && el.className ? "." + el.className.split(" ")[0] : "") +
		' "' + (el.textContent || el.value || "").trim().replace(/\s+/g, " ").slice(0, 30) + '"';
	const shown = (el) => {
		const r = el.getBoundingClientRect();
		if (r.width === 0 && r.height === 0) return false;
		const s = getComputedStyle(el);
		return s.visibility !== "hidden" && s.display !== "none" && Number(s.opacity) > 0;
	};
	if (document.documentElement.scrollWidth > W) problems.push("the page is " + document.documentElement.scrollWidth + " px wide on a " + W + " px screen");
	const all = Array.from(document.body.querySelectorAll("*")).filter(shown);
	for (const el of all) {
		if (el.hidden) problems.push(name(el) + " is shown although hidden");
	}
	for (const el of all) {
		const r = el.getBoundingClientRect();
		if (r.right > W + 0.5 || r.left < -0.5) problems.push(name(el) + " reaches " + Math.round(r.left) + " to " + Math.round(r.right) + " px");
	}
	for (const el of all.filter((e) => e.matches("button, a[href], select, textarea, input:not([type=radio]), .choices span"))) {
		const r = el.getBoundingClientRect();
		if (r.width < 48 || r.height < 48) problems.push(name(el) + " is a " + Math.round(r.width) + " x " + Math.round(r.height) + " px target");
	}
	for (const el of all.filter((e) => e.matches("input:not([type=radio]), select, textarea"))) {
		if (el.labels.length === 0 && !el.getAttribute("aria-label")) problems.push(name(el) + " has no label");
	}
	const rgba = (s) => { const m = s.match(/[\d.]+/g).map(Number); return { r: m[0], g: m[1], b: m[2], a: m.length > 3 ? m[3] : 1 }; };
	const lum = (c) => {
		const f = (v) => { v /= 255; return v <= 0.03928 ? v / 12.92 : Math.pow((v + 0.055) / 1.055, 2.4); };
		return 0.2126 * f(c.r) + 0.7152 * f(c.g) + 0.0722 * f(c.b);
	};
	const background = (el) => {
		for (let e = el; e; e = e.parentElement) {
			const c = rgba(getComputedStyle(e).backgroundColor);
			if (c.a > 0.5) return c;
		}
		return { r: 255, g: 255, b: 255, a: 1 };
	};
	let lowest = 21;
	for (const el of all) {
		const own = Array.from(el.childNodes).some((n) => n.nodeType === 3 && n.textContent.trim() !== "");
		const field = el.matches("input:not([type=radio]), select, textarea") && el.value;
		if (!own && !field) continue;
		const fg = lum(rgba(getComputedStyle(el).color)), bg = lum(background(el));
		const ratio = (Math.max(fg, bg) + 0.05) / (Math.min(fg, bg) + 0.05);
		lowest = Math.min(lowest, ratio);
		if (ratio < minContrast) problems.push(name(el) + " has contrast " + ratio.toFixed(2));
	}
	return { problems, lowest };
})`

type layoutReport struct {
	Problems []string `json:"problems"`
	Lowest   float64  `json:"lowest"`
}

// minContrast is WCAG 2's enhanced level (7:1, success criterion 1.4.6)
// rather than the minimum 4.5:1: crews read the screen in bright sun.
const minContrast = 7.0

// checkLayout runs layoutCheck at each width on the screen shown and
// reports every problem; it returns the lowest contrast seen.
func (p phone) checkLayout(screen string, widths ...int64) float64 {
	p.t.Helper()
	lowest := 21.0
	for _, w := range widths {
		p.do(chromedp.EmulateViewport(w, 740, chromedp.EmulateMobile, chromedp.EmulatePortrait))
		r := evalAs[layoutReport](p.page, fmt.Sprintf("%s(%v)", layoutCheck, minContrast))
		for _, pr := range r.Problems {
			p.t.Errorf("%s screen at %d px: %s", screen, w, pr)
		}
		lowest = min(lowest, r.Lowest)
	}
	p.do(chromedp.EmulateViewport(360, 740, chromedp.EmulateMobile, chromedp.EmulatePortrait))
	return lowest
}

// TestPhoneCaptureScreenInBrowser looks at the app as a crew member holds
// it: every screen at 320 and 360 px wide has no horizontal scroll, touch
// targets of at least 48 px, labelled fields and high contrast; the
// number fields bring up a numeric keypad; and the capture screen with a
// recapture's last record is photographed at 360 x 740 (written to
// TAGTALLY_SCREENSHOTS, or a temporary folder, logged).
func TestPhoneCaptureScreenInBrowser(t *testing.T) {
	ps := newPhoneServer(t)
	// One animal marked yesterday on another phone, so the capture screen
	// can show a recapture and its last record.
	mass := 21.5
	if _, _, err := ps.store.CreateCapture(&capture.Capture{
		ID: "01a23000-0000-7000-8000-000000000042", StudyID: ps.study.ID, TagID: "BF-0042", Event: capture.EventNewMark,
		Species: "bank vole", Sex: capture.SexFemale, Age: capture.AgeAdult, MassG: &mass, StationID: "A2",
		CapturedAt: time.Now().Add(-22 * time.Hour).Truncate(time.Second), Observer: "MH", Device: "phone-other",
	}); err != nil {
		t.Fatal(err)
	}
	p := openPhone(t, t.TempDir(), ps.url(), 360, 740, [2]float64{52.6103, 1.3500})
	lowest := 21.0
	p.joinScreen(ps.joinCode(), false)
	lowest = min(lowest, p.checkLayout("join", 320, 360))
	// Without initials the phone does not join: they go on every record.
	p.click("#join-submit")
	p.wait(`document.getElementById("join-code-error").textContent.includes("initials")`)
	lowest = min(lowest, p.checkLayout("join (no initials)", 320, 360))
	p.shot("phone-join-360x740.png", false)
	if n := len(ps.deviceTokens()); n != 0 {
		t.Errorf("the phone joined without initials (%d phone tokens)", n)
	}
	p.submitJoin("JW")
	lowest = min(lowest, p.checkLayout("cautions", 320, 360))
	p.acceptCautions()
	p.wait(`document.getElementById("last-sync").textContent !== "never" && document.getElementById("gps-line").textContent.startsWith("Position: 52.61")`)

	for _, f := range []struct{ id, mode string }{{"tag", "numeric"}, {"old-tag", "numeric"}, {"mass", "decimal"}, {"m-hind-foot", "decimal"}} {
		if got := evalAs[string](p.page, fmt.Sprintf(`document.getElementById(%q).inputMode`, f.id)); got != f.mode {
			t.Errorf("field %s brings up the %q keyboard, want %q", f.id, got, f.mode)
		}
	}

	// The capture screen as the crew sees it with an animal in hand.
	p.do(chromedp.SendKeys(chromedp.ID("tag"), "42"))
	p.wait(`document.querySelectorAll("#tag-suggestions button").length === 1`)
	p.click("#tag-suggestions button")
	p.wait(`document.getElementById("tag-status").classList.contains("recapture")`)
	if status := p.text("#tag-status"); !strings.Contains(status, "bank vole, female, adult, 21.5 g, station trap A2") {
		t.Errorf("recapture status does not show the animal's last record: %q", status)
	}
	p.do(chromedp.Evaluate[chromedp.Void](`window.scrollTo(0, 0)`))
	// The "study is ready" message lies over the header for a few
	// seconds after joining; the picture is of the screen the crew works
	// with, study name and sync state in view.
	p.wait(`document.getElementById("toast").hidden`)
	p.shot("phone-capture-360x740.png", false)
	p.shot("phone-capture-360-full.png", true)
	lowest = min(lowest, p.checkLayout("record", 320, 360))
	p.tap("event", "retag")
	lowest = min(lowest, p.checkLayout("record (retag)", 320, 360))
	p.tap("event", "recapture")
	p.tap("sex", "female")
	p.do(chromedp.SendKeys(chromedp.ID("mass"), "22"))
	p.click("#save")
	p.wait(`document.getElementById("tab-count").textContent === "1"`)

	p.click(`.tabs button[data-go="today"]`)
	p.wait(`document.querySelectorAll("#today-list li").length === 1`)
	lowest = min(lowest, p.checkLayout("today", 320, 360))
	p.click("#today-list li button")
	p.wait(`!document.getElementById("editing-banner").hidden`)
	lowest = min(lowest, p.checkLayout("record (editing)", 320, 360))
	p.click("#cancel-edit")

	// A tag outside the study's series: the warning is part of the screen
	// the crew reads at the net.
	p.click(`.tabs button[data-go="record"]`)
	p.wait(`!document.getElementById("screen-record").hidden`)
	p.do(chromedp.SendKeys(chromedp.ID("tag"), "BF-42"))
	p.wait(`document.querySelector("#tag-status .tag-warning") !== null`)
	lowest = min(lowest, p.checkLayout("record (tag outside the series)", 320, 360))
	p.do(chromedp.Evaluate[chromedp.Void](`window.scrollTo(0, 0)`))
	p.shot("phone-tag-warning-360x740.png", false)
	p.erase("tag")

	p.click(`.tabs button[data-go="outbox"]`)
	p.wait(`!document.getElementById("screen-outbox").hidden`)
	lowest = min(lowest, p.checkLayout("outbox", 320, 360))
	p.shot("phone-outbox-360x740.png", false)
	t.Logf("lowest text contrast on the screens: %.2f:1", lowest)
}

// TestPhoneBackupFileInBrowser follows a phone that cannot reach the camp
// server: the crew saves the outbox as a backup file on the phone, the
// coordinator imports the file, and when the phone reaches the server
// later its own push adds nothing: each record is held once, in one
// version, with no conflict. When the browser then clears the app's
// records, the app warns that they have vanished.
func TestPhoneBackupFileInBrowser(t *testing.T) {
	ps := newPhoneServer(t)
	p := openPhone(t, t.TempDir(), ps.url(), 360, 740, [2]float64{52.6103, 1.3500})
	p.join(ps.joinCode(), "JW", true)
	p.waitServiceWorker()
	ps.stop()
	for i, e := range []entry{
		{tag: "BF-0301", status: "new", station: "B1", sex: "male", mass: "20.5"},
		{tag: "BF-0302", status: "new", sex: "female", mass: "23", notes: "pregnant"},
		{tag: "BF-0301", status: "recapture", event: "resight"},
	} {
		p.record(e, i+1)
	}
	downloads := t.TempDir()
	if _, err := chromedp.CallBrowser(p.ctx, cdpbrowser.SetDownloadBehavior, cdpbrowser.SetDownloadBehaviorParams{
		Behavior: cdpbrowser.SetDownloadBehaviorBehaviorAllow, DownloadPath: downloads,
	}); err != nil {
		t.Fatal(err)
	}
	p.click(`.tabs button[data-go="outbox"]`)
	p.wait(`!document.getElementById("screen-outbox").hidden`)
	p.click("#save-backup")
	var file []byte
	for deadline := time.Now().Add(15 * time.Second); file == nil && time.Now().Before(deadline); time.Sleep(100 * time.Millisecond) {
		names, _ := filepath.Glob(filepath.Join(downloads, "tagtally-outbox-*.json"))
		if len(names) == 1 {
			file, _ = os.ReadFile(names[0])
		}
	}
	var backup struct {
		Kind    string         `json:"kind"`
		StudyID string         `json:"study_id"`
		Records []phoneCapture `json:"records"`
	}
	if err := json.Unmarshal(file, &backup); err != nil || backup.Kind != "tagtally outbox backup" || backup.StudyID != ps.study.ID || len(backup.Records) != 3 {
		t.Fatalf("backup file %q (%v): want the 3 waiting records of study %s", file, err, ps.study.ID)
	}

	// The coordinator imports the file at camp: importing needs the
	// coordinator's role.
	ps.start()
	coord, _ := issue(t, ps.srv, access.NewToken{Kind: access.KindCoordinator, Label: "test coordinator"})
	req, err := http.NewRequest(http.MethodPost, ps.url()+"/api/v1/studies/"+ps.study.ID+"/import?name=phone-backup.json", bytes.NewReader(file))
	if err != nil {
		t.Fatal(err)
	}
	req.Header.Set("Content-Type", "application/json")
	req.Header.Set("Authorization", "Bearer "+coord)
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	body, _ := io.ReadAll(resp.Body)
	resp.Body.Close()
	if resp.StatusCode != http.StatusOK {
		t.Fatalf("import of the phone's backup: %d %s", resp.StatusCode, body)
	}
	checkOnce := func(when string) {
		t.Helper()
		all, err := ps.store.Captures(ps.study.ID, true)
		if err != nil || len(all) != 3 {
			t.Fatalf("%s: server holds %d records (%v), want 3", when, len(all), err)
		}
		eng, err := ps.srv.engine()
		if err != nil {
			t.Fatal(err)
		}
		for _, r := range backup.Records {
			h, err := eng.History(ps.study.ID, r.ID)
			if err != nil || len(h.Leaves) != 1 || h.Conflict {
				t.Errorf("%s: record %s (%s): %v; want it held once with one leaf and no conflict (history %+v)", when, r.ID, r.TagID, err, h)
			}
		}
	}
	checkOnce("after the import")

	// The phone reaches the server later and sends its outbox.
	p.click("#sync-now")
	p.wait(`document.getElementById("outbox-count").textContent === "0"`)
	checkOnce("after the phone's own push")

	// The browser clears the app's records (as some phone browsers do
	// after days without use): the app says so plainly when opened next.
	if !evalAs[bool](p.page, `document.getElementById("vanished-banner").hidden`) {
		t.Error("the vanished-records warning shows while the records are there")
	}
	if _, err := chromedp.Call(p.ctx, storage.ClearDataForOrigin, storage.ClearDataForOriginParams{Origin: ps.url(), StorageTypes: "indexeddb"}); err != nil {
		t.Fatal(err)
	}
	p.do(chromedp.Reload())
	// Its token went with them: the phone must join again.
	p.wait(`!document.getElementById("vanished-banner").hidden && document.getElementById("screen-enrol") !== null && !document.getElementById("screen-enrol").hidden`)
}

// TestPhoneAppUpdatesInBrowser checks that opening the page from the
// cache first does not keep a phone on an old build: when the camp server
// has a new build (here the same app with another version name and a
// changed page), the open app finds it when it next syncs and installs
// the new service worker, which keeps the new page in a new cache and
// removes the old one; the next opening shows the new page.
func TestPhoneAppUpdatesInBrowser(t *testing.T) {
	ps := newPhoneServer(t)
	ps.stop()
	var build atomic.Value // the version name of the build served; "" for this one
	build.Store("")
	app := ps.srv.Handler()
	hs := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		next := build.Load().(string)
		if next == "" || (r.URL.Path != "/sw.js" && r.URL.Path != "/") {
			app.ServeHTTP(w, r)
			return
		}
		// The new build's files differ from what the phone holds, so its
		// revalidation must not be answered "not modified".
		r.Header.Del("If-None-Match")
		r.Header.Del("If-Modified-Since")
		rec := httptest.NewRecorder()
		app.ServeHTTP(rec, r)
		body := rec.Body.Bytes()
		if r.URL.Path == "/sw.js" {
			body = bytes.ReplaceAll(body, []byte(pwa.Version()), []byte(next))
		} else {
			body = bytes.Replace(body, []byte("<title>tagtally field log</title>"), []byte("<title>tagtally field log "+next+"</title>"), 1)
		}
		for k, v := range rec.Header() {
			if k != "Content-Length" && k != "Etag" {
				w.Header()[k] = v
			}
		}
		w.WriteHeader(rec.Code)
		w.Write(body)
	}))
	t.Cleanup(hs.Close)

	p := openPhone(t, t.TempDir(), hs.URL, 360, 740, [2]float64{52.61, 1.35})
	p.join(ps.joinCode(), "JW", false)
	p.waitServiceWorker()
	// The app stays open all day: the new build is found when it syncs.
	build.Store("next-build")
	p.click(`.tabs button[data-go="outbox"]`)
	p.click("#sync-now")
	p.wait(`(async () => { const ks = await caches.keys(); return ks.includes("tagtally-shell-next-build") && !ks.includes("tagtally-shell-` + pwa.Version() + `"); })()`)
	p.do(chromedp.Reload())
	p.wait(`!document.getElementById("screen-record").hidden`)
	if title := evalAs[string](p.page, `document.title`); title != "tagtally field log next-build" {
		t.Errorf("after the update the page is %q, want the new build's page", title)
	}
}

// TestPhoneJoinLinkOnOpenAppInBrowser: a join link opened while the app is
// already open (the phone's camera hands the link to the open app page)
// changes only the address's #part, which reloads nothing; the app must
// still take the code and offer the join step with it.
func TestPhoneJoinLinkOnOpenAppInBrowser(t *testing.T) {
	ps := newPhoneServer(t)
	p := openPhone(t, t.TempDir(), ps.url(), 360, 740, [2]float64{52.61, 1.35})
	p.join(ps.joinCode(), "JW", true)
	second := ps.joinCode()
	// Same document: only the fragment changes, so no reload happens.
	evalAs[string](p.page, `location.hash = "#join=`+second+`"`)
	p.wait(`(() => { const s = document.getElementById("screen-enrol"); return s !== null && !s.hidden; })()`)
	if got := evalAs[string](p.page, `document.getElementById("join-code").value`); got != second {
		t.Fatalf("join code box holds %q, want the link's %q", got, second)
	}
	if h := evalAs[string](p.page, `location.hash`); h != "" {
		t.Errorf("the join code stays in the address: %q", h)
	}
}
