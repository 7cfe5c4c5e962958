package open

import (
	"errors"
	"flag"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"tagtally/estimators"
)

var jsmlUpdate = flag.Bool("jsml-update", false, "rewrite testdata/jsml_histories.csv from the seeded simulation")

// jsmlReferenceSim is the seeded data set behind testdata/jsml_histories.csv.
func jsmlReferenceSim() *estimators.Histories {
	rng := rand.New(rand.NewPCG(1965, 1996))
	h, _ := gofSimulate(rng, gofSim{
		k:       5,
		entries: []int{200, 80, 60, 70, 50},
		phi:     []float64{0.7, 0.8, 0.65, 0.75},
		p:       []float64{0.45, 0.5, 0.4, 0.55, 0.5},
		loss:    0.02,
	})
	return h
}

// TestJSMLAgainstScipy compares the fitted maximum, estimates and delta-
// method SEs with testdata/jsml_scipy.py, which writes the likelihood
// history by history in its own code (explicit sums over entry occasions)
// and maximises it with scipy.optimize.minimize (Debian python3-scipy
// 1.10.1); its output is committed as testdata/jsml_scipy_output.csv.
func TestJSMLAgainstScipy(t *testing.T) {
	path := filepath.Join("testdata", "jsml_histories.csv")
	if *jsmlUpdate {
		writeHistoriesCSV(t, path, jsmlReferenceSim())
	}
	h := readHistoriesCSV(t, path)
	raw, err := os.ReadFile(filepath.Join("testdata", "jsml_scipy_output.csv"))
	if err != nil {
		t.Fatal(err)
	}
	type ref struct{ est, se float64 }
	want := map[string]map[string]ref{}
	for _, ln := range strings.Split(strings.TrimSpace(string(raw)), "\n")[1:] {
		f := strings.Split(ln, ",")
		e, _ := strconv.ParseFloat(f[2], 64)
		s, _ := strconv.ParseFloat(f[3], 64)
		if want[f[0]] == nil {
			want[f[0]] = map[string]ref{}
		}
		want[f[0]][f[1]] = ref{e, s}
	}
	maxRel, maxSERel := 0.0, 0.0
	defer func() {
		t.Logf("largest difference from scipy: estimates %.2g (relative, or absolute below 1), SEs %.2g relative", maxRel, maxSERel)
	}()
	for _, tc := range []struct {
		label    string
		phi, p   Structure
		compared int
	}{
		{"phi(.) p(.) b(t)", Constant, Constant, 0},
		{"phi(t) p(t) b(t)", Time, Time, 0},
	} {
		w := want[tc.label]
		if w == nil {
			t.Fatalf("no scipy reference for %s", tc.label)
		}
		r, err := JollySeberML(h, tc.phi, tc.p)
		if err != nil {
			t.Fatal(err)
		}
		// The maximised log-likelihood (same constant convention: without
		// -Σ ln n_ω!) from scipy.optimize.minimize.
		if d := math.Abs(r.Result.LogLik - w["loglik"].est); d > 1e-4 {
			t.Errorf("%s: lnL %.6f, scipy %.6f", tc.label, r.Result.LogLik, w["loglik"].est)
		}
		check := func(name string, got estimators.Value) {
			ref, ok := w[name]
			if !ok {
				t.Errorf("%s: scipy has no %s", tc.label, name)
				return
			}
			tc.compared++
			maxRel = math.Max(maxRel, math.Abs(got.Estimate-ref.est)/math.Max(1, math.Abs(ref.est)))
			maxSERel = math.Max(maxSERel, math.Abs(got.SE-ref.se)/ref.se)
			// Estimates: both optimisers stop close to the maximum; measured
			// agreement is about 1e-6, the tolerance 1e-4 (relative, or
			// absolute below 1).
			if math.Abs(got.Estimate-ref.est) > 1e-4*math.Max(1, math.Abs(ref.est)) {
				t.Errorf("%s: %s = %.6g, scipy %.6g", tc.label, name, got.Estimate, ref.est)
			}
			// SEs: both from finite-difference Hessians (different steps);
			// measured agreement about 0.06%, tolerance 1%.
			if math.Abs(got.SE-ref.se) > 0.01*ref.se+1e-9 {
				t.Errorf("%s: SE(%s) = %.6g, scipy %.6g", tc.label, name, got.SE, ref.se)
			}
		}
		check("N", r.Superpopulation)
		for _, p := range r.Result.Parameters {
			if strings.HasPrefix(p.Name, "b[") {
				continue // entry shares: compared through B and N[1]
			}
			check(p.Name, p.Value)
		}
		if tc.compared < 10 {
			t.Errorf("%s: only %d quantities compared", tc.label, tc.compared)
		}
	}
}

// TestJSMLLocalMaximum checks without any optimiser that the fit is a
// maximum: moving any working parameter by ±0.01 lowers the
// log-likelihood.
func TestJSMLLocalMaximum(t *testing.T) {
	h := jsmlReferenceSim()
	for _, s := range [][2]Structure{{Constant, Constant}, {Time, Constant}, {Constant, Time}, {Time, Time}} {
		st := jsStats(h)
		m := newJSModel(h.Occasions(), s[0], s[1], st)
		fit, err := estimators.Maximize(m.logLik, m.grad, m.start())
		if err != nil {
			t.Fatal(err)
		}
		for i := range fit.X {
			for _, d := range []float64{-0.01, 0.01} {
				x := append([]float64(nil), fit.X...)
				x[i] += d
				if v := m.logLik(x); v > fit.LogLik+1e-9 {
					t.Errorf("phi(%s) p(%s): moving x[%d] by %g raises lnL from %.6f to %.6f", s[0], s[1], i, d, fit.LogLik, v)
				}
			}
		}
	}
}

// TestJSMLGradient compares the analytic gradient with central finite
// differences at random points.
func TestJSMLGradient(t *testing.T) {
	h := jsmlReferenceSim()
	h.Removed[3] = true // make sure a loss on capture is in the data
	rng := rand.New(rand.NewPCG(4, 4))
	for _, s := range [][2]Structure{{Constant, Constant}, {Time, Constant}, {Constant, Time}, {Time, Time}} {
		m := newJSModel(h.Occasions(), s[0], s[1], jsStats(h))
		for trial := 0; trial < 5; trial++ {
			x := m.start()
			for i := range x {
				x[i] += rng.NormFloat64() * 0.5
			}
			g := make([]float64, len(x))
			m.grad(g, x)
			for i := range x {
				const d = 1e-6
				xp := append([]float64(nil), x...)
				xm := append([]float64(nil), x...)
				xp[i] += d
				xm[i] -= d
				num := (m.logLik(xp) - m.logLik(xm)) / (2 * d)
				if math.Abs(num-g[i]) > 1e-4*math.Max(1, math.Abs(num)) {
					t.Errorf("phi(%s) p(%s) x[%d]: analytic %.8g, numeric %.8g", s[0], s[1], i, g[i], num)
				}
			}
		}
	}
}

// TestJSMLRecoversTruth: a large population simulated with constant phi
// and p; phi(.) p(.) b(t) must recover phi, p, the superpopulation and
// every N_i within a few SEs, and the 95% intervals must cover them.
func TestJSMLRecoversTruth(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	entries := []int{2000, 600, 600, 600, 600, 600}
	h, alive := gofSimulate(rng, gofSim{k: 6, entries: entries, phi: constSlice(5, 0.75), p: constSlice(6, 0.4), loss: 0.01})
	r, err := JollySeberML(h, Constant, Constant)
	if err != nil {
		t.Fatal(err)
	}
	within := func(name string, v estimators.Value, truth float64) {
		t.Helper()
		if math.Abs(v.Estimate-truth) > 3*v.SE || v.SE <= 0 {
			t.Errorf("%s = %.4g (SE %.3g), truth %.4g", name, v.Estimate, v.SE, truth)
		}
	}
	phi, _ := r.Result.Param("phi")
	p, _ := r.Result.Param("p")
	within("phi", phi.Value, 0.75)
	within("p", p.Value, 0.4)
	within("superpopulation", r.Superpopulation, 5000) // sum of entries
	for j, o := range r.Occasions {
		within(o.N.Name, o.N.Value, float64(alive[j]))
	}
	for i, o := range r.Occasions[:len(r.Occasions)-1] {
		if o.B.Estimate < 0 || math.Abs(o.B.Estimate-float64(entries[i+1])) > 3*o.B.SE+0.15*float64(entries[i+1]) {
			t.Errorf("%s = %.1f (SE %.1f), entries %d", o.B.Name, o.B.Estimate, o.B.SE, entries[i+1])
		}
	}
}

// TestJSMLAgreesWithMoments: on large simulated data the likelihood
// phi(t) p(t) b(t) estimates of N_i, phi_i and B_i for the occasions where
// both are identifiable agree with the bias-adjusted moment estimates
// (JollySeber) within 3%: the two are asymptotically the same.
func TestJSMLAgreesWithMoments(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 8))
	h, _ := gofSimulate(rng, gofSim{k: 7, entries: []int{3000, 900, 700, 1000, 800, 900, 800},
		phi: []float64{0.8, 0.7, 0.75, 0.85, 0.7, 0.8}, p: []float64{0.4, 0.5, 0.35, 0.45, 0.5, 0.4, 0.45}, loss: 0.01})
	ml, err := JollySeberML(h, Time, Time)
	if err != nil {
		t.Fatal(err)
	}
	_, sum, err := FromHistories(h)
	if err != nil {
		t.Fatal(err)
	}
	mom, err := JollySeber(sum)
	if err != nil {
		t.Fatal(err)
	}
	compared := 0
	for j, o := range mom.Occasions {
		l := ml.Occasions[j]
		for _, c := range []struct {
			name   string
			mom    *estimators.Value
			ml     *estimators.Named
			relTol float64
		}{
			{"N", o.N, &l.N, 0.03},
			{"phi", o.Phi, l.Phi, 0.03},
			{"B", o.B, l.B, 0.05}, // B is a difference of two estimates: looser
		} {
			if c.mom == nil || c.ml == nil || !c.ml.Identifiable {
				continue
			}
			compared++
			if math.Abs(c.ml.Estimate-c.mom.Estimate) > c.relTol*math.Abs(c.mom.Estimate) {
				t.Errorf("occasion %d %s: likelihood %.4g, moments %.4g", j+1, c.name, c.ml.Estimate, c.mom.Estimate)
			}
		}
	}
	if compared < 10 {
		t.Errorf("only %d quantities compared", compared)
	}
}

func TestJSMLModelsAndSelection(t *testing.T) {
	h := jsmlReferenceSim()
	fits, sel, errs, err := JollySeberMLModels(h, 1)
	if err != nil {
		t.Fatal(err)
	}
	if len(errs) != 0 || len(fits) != 4 || len(sel.Rows) != 4 {
		t.Fatalf("fits %d, rows %d, errors %v", len(fits), len(sel.Rows), errs)
	}
	want := map[string]int{ // K: 3T-3, T+2, and the mixed ones (T = 5)
		"Jolly-Seber (likelihood) phi(t) p(t) b(t)": 12,
		"Jolly-Seber (likelihood) phi(.) p(.) b(t)": 7,
		"Jolly-Seber (likelihood) phi(t) p(.) b(t)": 10,
		"Jolly-Seber (likelihood) phi(.) p(t) b(t)": 9,
	}
	for _, f := range fits {
		if k, ok := want[f.Result.Method]; !ok || k != f.Result.Params {
			t.Errorf("%s: K = %d, want %d", f.Result.Method, f.Result.Params, k)
		}
	}
	for _, f := range fits {
		for _, p := range f.Result.Parameters {
			if math.IsNaN(p.Estimate) || math.IsNaN(p.SE) || math.IsNaN(p.Low) || math.IsNaN(p.High) {
				t.Errorf("%s: NaN in %s", f.Result.Method, p.Name)
			}
		}
	}
	if _, _, _, err := JollySeberMLModels(mustHistories(t, []string{"100", "010", "001"}, nil), 1); !errors.Is(err, estimators.ErrNoRecaptures) {
		t.Errorf("no recaptures: err = %v", err)
	}
	sel3 := estimators.Select([]*estimators.Result{fits[0].Result, fits[1].Result}, 3, 0)
	if sel3.CriterionName != "QAICc" {
		t.Errorf("c-hat 3 gives %s", sel3.CriterionName)
	}
}

// TestJSMLBoundarySE: nobody enters between occasions 2 and 3, so that
// entry share is estimated at 0; the fit is flagged as a boundary and the
// other parameters still get standard errors, computed with it held fixed.
func TestJSMLBoundarySE(t *testing.T) {
	rng := rand.New(rand.NewPCG(6, 6))
	h, _ := gofSimulate(rng, gofSim{k: 6, entries: []int{800, 300, 0, 300, 300, 300}, phi: constSlice(5, 0.8), p: constSlice(6, 0.5)})
	r, err := JollySeberML(h, Constant, Constant)
	if err != nil {
		t.Fatal(err)
	}
	b2, _ := r.Result.Param("b[2]")
	phi, _ := r.Result.Param("phi")
	if b2.Estimate > 0.01 {
		t.Fatalf("b[2] = %g is not at the boundary with this seed: the test needs a boundary fit", b2.Estimate)
	}
	if !r.Result.Boundary || phi.SE <= 0 || r.Superpopulation.SE <= 0 {
		t.Errorf("boundary %v, SE(phi) %g, SE(N) %g; want a flagged boundary and positive SEs", r.Result.Boundary, phi.SE, r.Superpopulation.SE)
	}
	t.Logf("b[2] = %.3g; warnings: %v", b2.Estimate, r.Result.Warnings)
}

func TestJSMLBadInput(t *testing.T) {
	for _, tc := range []struct {
		name   string
		h      *estimators.Histories
		phi, p Structure
		want   error
	}{
		{"nil", nil, Constant, Constant, estimators.ErrNoData},
		{"two occasions", mustHistories(t, []string{"11", "10", "01"}, nil), Constant, Constant, estimators.ErrTooFewOccasions},
		{"no recaptures", mustHistories(t, []string{"100", "010", "001"}, nil), Time, Time, estimators.ErrNoRecaptures},
		{"group structure", mustHistories(t, []string{"110", "011"}, nil), Group, Constant, estimators.ErrInvalidInput},
		{"never caught", mustHistories(t, []string{"110", "000"}, nil), Constant, Constant, estimators.ErrInvalidInput},
	} {
		_, err := JollySeberML(tc.h, tc.phi, tc.p)
		if !errors.Is(err, tc.want) {
			t.Errorf("%s: err = %v, want %v", tc.name, err, tc.want)
		}
	}
	// Tiny data: a fit or a clear error, never a NaN.
	h := mustHistories(t, []string{"110", "011", "101", "100", "010"}, []bool{false, true, false, false, false})
	r, err := JollySeberML(h, Time, Time)
	if err != nil {
		if !errors.Is(err, estimators.ErrNotConverged) {
			t.Fatalf("tiny data: %v", err)
		}
		return
	}
	for _, p := range r.Result.Parameters {
		if math.IsNaN(p.Estimate) || math.IsNaN(p.SE) || math.IsNaN(p.Low) || math.IsNaN(p.High) {
			t.Errorf("tiny data: NaN in %s", p.Name)
		}
	}
}

func ExampleJollySeberML() {
	rng := rand.New(rand.NewPCG(1, 2))
	h, _ := gofSimulate(rng, gofSim{k: 5, entries: []int{400, 150, 150, 150, 150}, phi: constSlice(4, 0.75), p: constSlice(5, 0.5)})
	r, err := JollySeberML(h, Constant, Constant)
	if err != nil {
		fmt.Println(err)
		return
	}
	phi, _ := r.Result.Param("phi")
	fmt.Printf("%s: phi = %.2f, superpopulation = %.0f\n", r.Result.Method, phi.Estimate, r.Superpopulation.Estimate)
	for _, o := range r.Occasions {
		fmt.Printf("occasion %d: N = %.0f\n", o.Occasion, o.N.Estimate)
	}
	// Output:
	// Jolly-Seber (likelihood) phi(.) p(.) b(t): phi = 0.75, superpopulation = 1003
	// occasion 1: N = 406
	// occasion 2: N = 447
	// occasion 3: N = 498
	// occasion 4: N = 524
	// occasion 5: N = 540
}

// TestJSMLCoverage reports how often the 95% intervals of phi(.) p(.) b(t)
// cover the true phi, p and superpopulation size over seeded simulations,
// and fails if coverage is far from nominal (binomial SE about 1.5 points
// with 300 replicates).
func TestJSMLCoverage(t *testing.T) {
	reps := 300
	if testing.Short() {
		reps = 80
	}
	rng := rand.New(rand.NewPCG(2026, 12))
	cover := map[string]int{}
	for r := 0; r < reps; r++ {
		h, _ := gofSimulate(rng, gofSim{k: 6, entries: []int{300, 100, 100, 100, 100, 100}, phi: constSlice(5, 0.7), p: constSlice(6, 0.4)})
		res, err := JollySeberML(h, Constant, Constant)
		if err != nil {
			t.Fatal(err)
		}
		phi, _ := res.Result.Param("phi")
		p, _ := res.Result.Param("p")
		for name, c := range map[string]struct {
			iv    estimators.Interval
			truth float64
		}{"phi": {phi.Interval, 0.7}, "p": {p.Interval, 0.4}, "N": {res.Superpopulation.Interval, 800}} {
			if c.iv.Low <= c.truth && c.truth <= c.iv.High {
				cover[name]++
			}
		}
	}
	for _, name := range []string{"phi", "p", "N"} {
		c := float64(cover[name]) / float64(reps)
		t.Logf("coverage of the 95%% interval for %s: %.3f over %d data sets", name, c, reps)
		if c < 0.89 || c > 0.99 {
			t.Errorf("coverage for %s is %.3f, want about 0.95", name, c)
		}
	}
}
