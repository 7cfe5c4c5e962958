package server

import (
	"context"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	stdsync "sync"
	"testing"
	"time"

	"github.com/chromedp/cdproto/runtime"
	"github.com/chromedp/chromedp"

	"tagtally/capture"
	"tagtally/demo"
)

// chromiumPath finds Debian's chromium (or TAGTALLY_CHROMIUM). Without
// it the browser tests skip, except under CI=true, where a missing
// browser is a failure: CI must run them.
func chromiumPath(t *testing.T) string {
	t.Helper()
	for _, p := range []string{os.Getenv("TAGTALLY_CHROMIUM"), "/usr/bin/chromium", "/usr/bin/chromium-browser"} {
		if p == "" {
			continue
		}
		if _, err := exec.LookPath(p); err == nil {
			return p
		}
	}
	if os.Getenv("CI") == "true" {
		t.Fatal("chromium not found (install Debian's chromium package or set TAGTALLY_CHROMIUM); browser tests must run in CI")
	}
	t.Skip("browser test skipped: chromium not found at /usr/bin/chromium (install Debian's chromium package or set TAGTALLY_CHROMIUM)")
	return ""
}

// screenshotDir is TAGTALLY_SCREENSHOTS when set, else a temporary folder.
func screenshotDir(t *testing.T) string {
	if d := os.Getenv("TAGTALLY_SCREENSHOTS"); d != "" {
		if err := os.MkdirAll(d, 0o755); err != nil {
			t.Fatal(err)
		}
		return d
	}
	return t.TempDir()
}

// browser starts a headless chromium with a fresh profile and a 1280 x
// 800 window. It records uncaught page errors; the test fails on any.
func browser(t *testing.T) context.Context {
	t.Helper()
	return browserWithProfile(t, t.TempDir())
}

// browserWithProfile is browser on the profile folder profile, which keeps
// the browser's storage (IndexedDB, service workers, caches) between
// starts, as a phone keeps it when the app is closed. chromedp.Cancel on
// the returned context closes the browser before the test ends.
func browserWithProfile(t *testing.T, profile string) context.Context {
	t.Helper()
	opts := []chromedp.ExecAllocatorOption{
		chromedp.ExecPath(chromiumPath(t)),
		chromedp.Headless,
		chromedp.NoSandbox,
		chromedp.DisableGPU,
		chromedp.NoFirstRun,
		chromedp.NoDefaultBrowserCheck,
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true),
		chromedp.Flag("disable-quic", true),
		chromedp.UserDataDir(profile),
		chromedp.WindowSize(1280, 800),
	}
	// Reopening a profile right after its browser closed can fail while
	// the old process still holds the profile's lock (seen on a loaded
	// machine: "chrome failed to start"); give it a moment and try again.
	var actx, tctx, ctx context.Context
	var cancelA, cancelT, cancelB context.CancelFunc
	for attempt := 1; ; attempt++ {
		actx, cancelA = chromedp.NewExecAllocator(context.Background(), opts...)
		tctx, cancelT = context.WithTimeout(actx, 2*time.Minute)
		ctx, cancelB = chromedp.NewContext(tctx)
		_, err := chromedp.Run(ctx, chromedp.Evaluate[bool]("true"))
		if err == nil {
			break
		}
		cancelB()
		cancelT()
		cancelA()
		if attempt == 3 {
			t.Fatalf("starting chromium (%d attempts): %v", attempt, err)
		}
		time.Sleep(time.Second)
	}
	var mu stdsync.Mutex
	var pageErrors []string
	if err := chromedp.Listen(ctx, func(ev any) {
		if e, ok := ev.(*runtime.EventExceptionThrown); ok {
			mu.Lock()
			d := e.ExceptionDetails
			msg := fmt.Sprintf("%s at %s:%d", d.Text, d.URL, d.LineNumber+1)
			if d.Exception != nil {
				msg += ": " + d.Exception.Description
			}
			pageErrors = append(pageErrors, msg)
			mu.Unlock()
		}
	}); err != nil {
		t.Fatalf("starting chromium: %v", err)
	}
	t.Cleanup(func() {
		cancelB()
		cancelT()
		cancelA()
		mu.Lock()
		defer mu.Unlock()
		for _, e := range pageErrors {
			t.Errorf("page error: %s", e)
		}
	})
	return ctx
}

// page drives one tab and fails the test on the first error.
type page struct {
	t   *testing.T
	ctx context.Context
	dir string
}

func (p page) do(steps ...chromedp.Action[chromedp.Void]) {
	p.t.Helper()
	if err := chromedp.Do(p.ctx, steps...); err != nil {
		p.t.Fatal(err)
	}
}

// signIn follows a fresh coordinator link, as the coordinator does with
// the one tagtally serve prints, and waits for the signed-in pages.
func (p page) signIn(srv *Server, base string) {
	p.t.Helper()
	code, err := srv.Access().NewClaim()
	if err != nil {
		p.t.Fatal(err)
	}
	p.do(chromedp.Navigate(ClaimURL(base, code)), chromedp.WaitVisible(chromedp.CSS(`main[data-shown="summary"]`)))
}

// show navigates to a view of the coordinator's pages and waits until it
// has loaded.
func (p page) show(base, view string) {
	p.t.Helper()
	// A blank page first, so that showing the view already shown loads
	// it afresh.
	p.do(chromedp.EmulateViewport(1280, 800), chromedp.Navigate("about:blank"), chromedp.Navigate(base+"/coord/?study="+demo.StudyID+"#"+view),
		chromedp.WaitVisible(chromedp.CSS(fmt.Sprintf(`main[data-shown=%q]`, view))))
}

func evalAs[T any](p page, expr string) T {
	p.t.Helper()
	v, err := chromedp.Run(p.ctx, chromedp.Evaluate[T](expr))
	if err != nil {
		p.t.Fatalf("%s: %v", expr, err)
	}
	return v
}

func (p page) text(sel string) string {
	p.t.Helper()
	v, err := chromedp.Run(p.ctx, chromedp.Text(chromedp.CSS(sel)))
	if err != nil {
		p.t.Fatal(err)
	}
	return v
}

// shot writes a screenshot of the window (full: of the whole page) to the
// screenshot folder and logs its path.
func (p page) shot(name string, full bool) {
	p.t.Helper()
	a := chromedp.CaptureScreenshot()
	if full {
		a = chromedp.FullScreenshot(100) // 100 means PNG
	}
	b, err := chromedp.Run(p.ctx, a)
	if err != nil {
		p.t.Fatal(err)
	}
	path := filepath.Join(p.dir, name)
	if err := os.WriteFile(path, b, 0o644); err != nil {
		p.t.Fatal(err)
	}
	p.t.Logf("screenshot: %s", path)
}

// TestCoordinatorPagesInBrowser drives the coordinator's pages on the demo
// study: the data checks list the demo's deliberate problems and a record
// is corrected through the editor; a conflict made by two replicas is
// resolved by keeping one version; the estimates page shows the model
// table, its cautions and the plots; screenshots at 1280 x 800 are
// written to TAGTALLY_SCREENSHOTS (or a temporary folder, logged).
func TestCoordinatorPagesInBrowser(t *testing.T) {
	ds := newDemoServer(t)
	conflictID := makeConflict(t, ds)
	hs := ds.Server // the API and the embedded app, as the camp server serves them
	p := page{t: t, ctx: browser(t), dir: screenshotDir(t)}
	watchCSP(p)
	p.signIn(ds.srv, hs.URL)

	// Data checks: the demo's five deliberate problems and the conflict.
	p.show(hs.URL, "checks")
	codes := evalAs[[]string](p, `Array.from(document.querySelectorAll("section.check")).map(e => e.dataset.code)`)
	text := p.text("main")
	p.shot("coord-checks.png", false)
	for _, want := range []string{capture.CheckNeverMarked, capture.CheckSexChanged, capture.CheckLikelyDuplicate, capture.CheckMassRange, capture.CheckNoStation, capture.CheckEditConflict} {
		if !contains(codes, want) {
			t.Errorf("checks page lacks %s (has %v)", want, codes)
		}
	}
	for _, want := range []string{demo.UnknownTag, "212 g", "Effect on estimates"} {
		if !strings.Contains(text, want) {
			t.Errorf("checks page does not mention %q", want)
		}
	}

	// Correct the slipped decimal through the record editor.
	massSel := `section.check[data-code="mass_out_of_range"] button[data-capture]`
	massID := evalAs[string](p, `document.querySelector('`+massSel+`').dataset.capture`)
	p.do(chromedp.Click(chromedp.CSS(massSel)),
		chromedp.WaitVisible(chromedp.CSS(`#f-mass_g`)),
		chromedp.SetValue(chromedp.CSS(`#f-mass_g`), "21.2"),
		chromedp.Click(chromedp.CSS(`#editor-save`)),
		chromedp.WaitNotPresent(chromedp.CSS(`section.check[data-code="mass_out_of_range"]`)),
		chromedp.WaitVisible(chromedp.CSS(`main[data-shown="checks"]`)))
	if rec, err := ds.store.GetCapture(demo.StudyID, massID); err != nil || rec.MassG == nil || *rec.MassG != 21.2 || rec.Notes != demo.NoteHeavy {
		t.Errorf("edited record: %+v, %v; want mass 21.2 g and the rest unchanged", rec, err)
	}

	// Conflicts: both versions side by side; keep the phone's.
	p.show(hs.URL, "conflicts")
	versions := evalAs[int](p, `document.querySelectorAll("section[data-conflict] button[data-keep]").length`)
	keep := evalAs[int](p, `(() => {
		for (const tr of document.querySelectorAll("table.diff tbody tr")) {
			if (tr.dataset.field !== "notes") continue;
			for (let i = 1; i < tr.cells.length; i++) if (tr.cells[i].textContent.includes("weighed again")) return i - 1;
		}
		return -1;
	})()`)
	p.shot("coord-conflicts.png", false)
	if versions != 2 || keep < 0 {
		t.Fatalf("conflict page: %d versions, phone's version at %d", versions, keep)
	}
	p.do(chromedp.Click(chromedp.CSS(fmt.Sprintf(`button[data-keep="%d"]`, keep))),
		chromedp.WaitNotPresent(chromedp.CSS(`section[data-conflict]`)),
		chromedp.WaitVisible(chromedp.CSS(`main[data-shown="conflicts"]`)))
	if text := p.text("main"); !strings.Contains(text, "No record has conflicting versions") {
		t.Errorf("after resolving: %q", text)
	}
	if rec, err := ds.store.GetCapture(demo.StudyID, conflictID); err != nil || *rec.MassG != 23.0 || rec.Revision.Conflict || len(rec.Revision.Parents) != 2 {
		t.Errorf("resolved record: %+v, %v", rec, err)
	}

	// Devices.
	p.show(hs.URL, "devices")
	if n := evalAs[int](p, `document.querySelectorAll("main tbody tr").length`); n != 3 {
		t.Errorf("devices table has %d rows, want the demo's 3 phones", n)
	}

	// Estimates: the model table, its averaged N as the API gives it, the
	// cautions and the plots.
	var ans estimatesAnswer
	ds.getJSON(t, "/api/v1/studies/"+demo.StudyID+"/estimates", &ans)
	p.show(hs.URL, "estimates")
	rows := evalAs[int](p, `document.querySelectorAll("#model-table tbody tr").length`)
	plots := evalAs[int](p, `document.querySelectorAll("main svg.plot").length`)
	avgN := evalAs[string](p, `document.querySelector("#model-table tr.avg td:nth-child(2)").textContent`)
	cautions := p.text("#estimate-cautions")
	p.shot("coord-estimates-1280x800.png", false)
	p.shot("coord-estimates-full.png", true)
	families := map[string]bool{}
	for _, r := range ans.Report.Closed.Rows {
		families[r.Family] = true
	}
	if want := len(ans.Report.Closed.Rows) + len(families) + 2; rows != want || plots < 3 {
		t.Errorf("estimates page: %d table rows, want %d (models, a heading row per family, 2 averages); %d plots", rows, want, plots)
	}
	if want := fmt.Sprintf("%.1f", ans.Report.Closed.AveragedN.Estimate); avgN != want {
		t.Errorf("page shows model-averaged N %q, API %q", avgN, want)
	}
	if !strings.Contains(cautions, "provisional") || !strings.Contains(cautions, "Recapture of a tag that was never marked") {
		t.Errorf("estimate cautions do not warn of the open checks: %q", cautions)
	}

	// The same study read as an open design: Jolly-Seber by occasion and
	// survival models, with their plots.
	st, err := ds.store.GetStudy(demo.StudyID)
	if err != nil {
		t.Fatal(err)
	}
	st.Design = capture.DesignOpen
	if err := ds.store.PutStudy(st); err != nil {
		t.Fatal(err)
	}
	p.show(hs.URL, "estimates")
	jsRows := evalAs[int](p, `document.querySelectorAll("#js-table tbody tr").length`)
	cjsRows := evalAs[int](p, `document.querySelectorAll("#cjs-table tbody tr").length`)
	plots = evalAs[int](p, `document.querySelectorAll("main svg.plot").length`)
	p.shot("coord-estimates-open-full.png", true)
	if jsRows != demo.Occasions || cjsRows == 0 || plots < 5 {
		t.Errorf("open estimates: %d Jolly-Seber rows (want %d), %d CJS rows, %d plots", jsRows, demo.Occasions, cjsRows, plots)
	}

	// And as a robust design: three primary periods of 3, 3 and 2 nights.
	for i := range st.Occasions {
		st.Occasions[i].Primary = 1 + i*3/len(st.Occasions)
	}
	st.Design = capture.DesignRobust
	if err := ds.store.PutStudy(st); err != nil {
		t.Fatal(err)
	}
	p.show(hs.URL, "estimates")
	if n := evalAs[int](p, `document.querySelectorAll("#robust-table tbody tr").length`); n != 3 {
		t.Errorf("robust design: %d primary rows, want 3 (%s)", n, p.text("main"))
	}
	p.shot("coord-estimates-robust-full.png", true)

	// Summary.
	p.show(hs.URL, "summary")
	text = p.text("main")
	p.shot("coord-summary.png", false)
	for _, want := range []string{"Animals caught", "Recaptured", "Sex ratio", "Age structure", "Permit reference"} {
		if !strings.Contains(text, want) {
			t.Errorf("summary page lacks %q", want)
		}
	}
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}
