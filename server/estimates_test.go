package server

import (
	"encoding/json"
	"io"
	"log/slog"
	"math"
	"net/http"
	"net/http/httptest"
	"testing"

	"tagtally/analysis"
	"tagtally/capture"
	"tagtally/capture/storetest"
	"tagtally/demo"
	"tagtally/estimators"
	"tagtally/estimators/closed"
	"tagtally/estimators/open"
)

// demoServer is a test server over a store holding the demo study.
type demoServer struct {
	*httptest.Server
	srv   *Server
	store *capture.Store
}

func newDemoServer(t *testing.T) *demoServer {
	t.Helper()
	store := storetest.Open(t)
	if _, err := demo.Load(store); err != nil {
		t.Fatal(err)
	}
	cfg := DefaultConfig()
	cfg.Logger = slog.New(slog.NewTextHandler(io.Discard, nil))
	srv, err := New(store, cfg)
	if err != nil {
		t.Fatal(err)
	}
	hs := httptest.NewServer(srv.Handler())
	t.Cleanup(hs.Close)
	signIn(t, srv, hs)
	return &demoServer{Server: hs, srv: srv, store: store}
}

// getJSON fetches path and decodes a 200 reply into v.
func (ds *demoServer) getJSON(t *testing.T, path string, v any) {
	t.Helper()
	resp, err := ds.Client().Get(ds.URL + path)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	raw, _ := io.ReadAll(resp.Body)
	if resp.StatusCode != http.StatusOK {
		t.Fatalf("GET %s: %d %s", path, resp.StatusCode, raw)
	}
	if err := json.Unmarshal(raw, v); err != nil {
		t.Fatalf("GET %s: %v", path, err)
	}
}

// histories builds the estimators' input from the stored records the way
// the analysis report documents it (histories grouped by sex, then
// analysis.FromHistorySet), independently of the HTTP path.
func histories(t *testing.T, store *capture.Store) *estimators.Histories {
	t.Helper()
	hs, err := store.Histories(demo.StudyID, &capture.HistoryOptions{GroupBy: "sex"})
	if err != nil {
		t.Fatal(err)
	}
	h, _, err := analysis.FromHistorySet(hs)
	if err != nil {
		t.Fatal(err)
	}
	return h
}

// sameValue compares two estimates. JSON carries float64 exactly (Go
// writes the shortest representation that reads back to the same bits),
// so the tolerance only allows for optimiser runs that are not bit-for-bit
// repeatable; 1e-9 relative is far below any digit shown.
func sameValue(t *testing.T, what string, got, want estimators.Value) {
	t.Helper()
	for _, p := range [][3]any{{"estimate", got.Estimate, want.Estimate}, {"se", got.SE, want.SE}, {"ci_low", got.Low, want.Low}, {"ci_high", got.High, want.High}} {
		g, w := p[1].(float64), p[2].(float64)
		if math.Abs(g-w) > 1e-9*math.Max(1, math.Abs(w)) {
			t.Errorf("%s %s: API %v, estimators %v", what, p[0], g, w)
		}
	}
	if got.Kind != want.Kind {
		t.Errorf("%s interval kind: API %q, estimators %q", what, got.Kind, want.Kind)
	}
}

// TestEstimatesClosedMatchEstimators: the closed model table the API
// returns for the demo study is the one closed.Table computes from the
// same histories: every row's N, SE, interval, AICc and weight, and the
// model-averaged N.
func TestEstimatesClosedMatchEstimators(t *testing.T) {
	ds := newDemoServer(t)
	var got estimatesAnswer
	ds.getJSON(t, "/api/v1/studies/"+demo.StudyID+"/estimates", &got)
	if got.Design != capture.DesignClosed || got.Report == nil || got.Report.Closed == nil {
		t.Fatalf("no closed table: design %q, errors %v", got.Design, got.Report)
	}
	want, err := closed.Table(histories(t, ds.store), closed.TableOptions{})
	if err != nil {
		t.Fatal(err)
	}
	gt := got.Report.Closed
	if len(gt.Rows) != len(want.Rows) {
		t.Fatalf("%d rows, estimators give %d", len(gt.Rows), len(want.Rows))
	}
	for i, w := range want.Rows {
		g := gt.Rows[i]
		if g.ID != w.ID || g.Error != w.Error || g.Ranked != w.Ranked {
			t.Errorf("row %d: API %s %q ranked %v, estimators %s %q ranked %v", i, g.ID, g.Error, g.Ranked, w.ID, w.Error, w.Ranked)
			continue
		}
		if w.Result == nil || w.Result.N == nil {
			continue
		}
		sameValue(t, w.ID+" N", *g.Result.N, *w.Result.N)
		if math.Abs(g.Criterion-w.Criterion) > 1e-9*math.Max(1, math.Abs(w.Criterion)) || math.Abs(g.Weight-w.Weight) > 1e-9 {
			t.Errorf("%s: API AICc %v weight %v, estimators %v %v", w.ID, g.Criterion, g.Weight, w.Criterion, w.Weight)
		}
	}
	if gt.AveragedN == nil || want.AveragedN == nil {
		t.Fatal("no model-averaged N")
	}
	sameValue(t, "model-averaged N", *gt.AveragedN, *want.AveragedN)
	// The demo's deliberate problems that change histories come with the
	// estimates, and the page is told to say so.
	codes := map[string]bool{}
	for _, ch := range got.Checks {
		codes[ch.Code] = true
		if !ch.AffectsEstimates {
			t.Errorf("check %s does not affect estimates but is listed with them", ch.Code)
		}
	}
	for _, c := range []string{capture.CheckNeverMarked, capture.CheckSexChanged, capture.CheckMassRange} {
		if !codes[c] {
			t.Errorf("estimates do not carry the %s check (got %v)", c, codes)
		}
	}
	if got.OpenChecks != 5 || len(got.Cautions) == 0 {
		t.Errorf("open checks %d (demo has 5 deliberate problems), cautions %q", got.OpenChecks, got.Cautions)
	}
}

// TestEstimatesOpenMatchEstimators: with the demo study's design set to
// open, the Jolly-Seber table by occasion and the CJS phi(.) p(.) fit
// that the API returns equal open.JollySeber and open.CJSGroups on the
// same histories.
func TestEstimatesOpenMatchEstimators(t *testing.T) {
	ds := newDemoServer(t)
	st, err := ds.store.GetStudy(demo.StudyID)
	if err != nil {
		t.Fatal(err)
	}
	st.Design = capture.DesignOpen
	if err := ds.store.PutStudy(st); err != nil {
		t.Fatal(err)
	}
	var got estimatesAnswer
	ds.getJSON(t, "/api/v1/studies/"+demo.StudyID+"/estimates", &got)
	if got.Report == nil || got.Report.JollySeber == nil || got.Report.CJS == nil || got.Report.Closed != nil {
		t.Fatalf("open design: want Jolly-Seber and CJS and no closed table; errors %v", got.Report.Errors)
	}
	h := histories(t, ds.store)
	_, sum, err := open.FromHistories(h)
	if err != nil {
		t.Fatal(err)
	}
	js, err := open.JollySeber(sum)
	if err != nil {
		t.Fatal(err)
	}
	if len(got.Report.JollySeber.Occasions) != len(js.Occasions) {
		t.Fatalf("%d Jolly-Seber occasions, estimators give %d", len(got.Report.JollySeber.Occasions), len(js.Occasions))
	}
	for i, w := range js.Occasions {
		g := got.Report.JollySeber.Occasions[i]
		for _, p := range []struct {
			name string
			g, w *estimators.Value
		}{{"N", g.N, w.N}, {"phi", g.Phi, w.Phi}, {"B", g.B, w.B}, {"p", g.P, w.P}} {
			if (p.g == nil) != (p.w == nil) {
				t.Errorf("occasion %d %s: API has it %v, estimators %v", w.Occasion, p.name, p.g != nil, p.w != nil)
				continue
			}
			if p.w != nil {
				sameValue(t, p.name, *p.g, *p.w)
			}
		}
	}
	groups, ms, err := open.GroupMArrays(h)
	if err != nil {
		t.Fatal(err)
	}
	want, err := open.CJSGroups(ms, groups, open.Constant, open.Constant)
	if err != nil {
		t.Fatal(err)
	}
	found := false
	for _, row := range got.Report.CJS.Rows {
		if row.Result == nil || row.Result.Method != want.Method {
			continue
		}
		found = true
		if math.Abs(row.Result.LogLik-want.LogLik) > 1e-7 {
			t.Errorf("CJS %s lnL: API %v, estimators %v", want.Method, row.Result.LogLik, want.LogLik)
		}
		for j, w := range want.Parameters {
			sameValue(t, "CJS "+w.Name, row.Result.Parameters[j].Value, w.Value)
		}
	}
	if !found {
		t.Errorf("API's CJS table has no %s row", want.Method)
	}
}

func TestEstimatesUnknownStudy(t *testing.T) {
	ds := newDemoServer(t)
	for _, p := range []string{"estimates", "summary", "checks"} {
		resp, err := ds.Client().Get(ds.URL + "/api/v1/studies/no-such-study/" + p)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		if resp.StatusCode != http.StatusNotFound {
			t.Errorf("%s of a missing study: %d, want 404", p, resp.StatusCode)
		}
	}
}

// TestSummary: counts checked against the demo's records directly, and the
// demography sections are the report's.
func TestSummary(t *testing.T) {
	ds := newDemoServer(t)
	var got summaryAnswer
	ds.getJSON(t, "/api/v1/studies/"+demo.StudyID+"/summary", &got)
	_, caps := demo.Build()
	news := 0
	for _, c := range caps {
		if c.Event == capture.EventNewMark {
			news++
		}
	}
	if got.Records != len(caps) || got.NewMarks != news {
		t.Errorf("records %d new marks %d, want %d and %d", got.Records, got.NewMarks, len(caps), news)
	}
	h := histories(t, ds.store)
	once := 0
	for _, row := range h.Caught {
		k := 0
		for _, c := range row {
			if c {
				k++
			}
		}
		if k == 1 {
			once++
		}
	}
	if got.Animals != len(h.Caught) || got.Recaptured != len(h.Caught)-once {
		t.Errorf("animals %d recaptured %d, want %d and %d", got.Animals, got.Recaptured, len(h.Caught), len(h.Caught)-once)
	}
	rr := got.RecaptureRate
	if rr == nil || rr.Low > rr.Proportion || rr.High < rr.Proportion || rr.Kind == "" {
		t.Errorf("recapture rate %+v", rr)
	}
	if got.SexRatio == nil || got.SexRatio.Males+got.SexRatio.Females+got.SexRatio.Unknown != got.Animals {
		t.Errorf("sex ratio %+v does not cover the %d animals", got.SexRatio, got.Animals)
	}
	if got.Ages == nil || len(got.PerOccasion) != demo.Occasions || got.OpenChecks != 5 {
		t.Errorf("ages %v, %d occasions, %d open checks", got.Ages != nil, len(got.PerOccasion), got.OpenChecks)
	}
}
