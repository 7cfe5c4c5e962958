package closed

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"

	"tagtally/estimators"
)

func TestTableInvented(t *testing.T) {
	h := readHistoryCSVForTest(t, "testdata/mth-invented.csv")
	rep, err := Table(h, TableOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if rep.Animals != 119 || rep.Occasions != 8 {
		t.Fatalf("animals %d occasions %d", rep.Animals, rep.Occasions)
	}
	seen := map[string]bool{}
	var wsum, nbar, wN float64
	for _, r := range rep.Rows {
		seen[r.ID] = true
		if r.Result == nil && r.Error == "" {
			t.Errorf("%s: neither result nor error", r.ID)
		}
		if r.Result != nil {
			checkN(t, r.Result, rep.Animals)
		}
		if r.Family == FamilyFull && r.Ranked {
			wsum += r.Weight
			nbar += r.Weight * r.Result.N.Estimate
			wN += r.Weight
		}
	}
	for _, id := range []string{"m0", "mt", "mb", "mh", "mth", "mtb", "huggins", "jackknife", "chao-mh", "chao-mt", "chao-mth", "schnabel", "schumacher-eschmeyer"} {
		if !seen[id] {
			t.Errorf("model %s missing from the table", id)
		}
	}
	if seen["chapman"] || seen["huggins-covariates"] {
		t.Errorf("models that do not apply were listed")
	}
	near(t, "sum of Akaike weights", wsum, 1, 1e-9)
	if rep.AveragedN == nil {
		t.Fatal("no averaged N")
	}
	// Model-averaged N recomputed from the rows (Burnham & Anderson 2002, eq. 4.1).
	near(t, "averaged N", rep.AveragedN.Estimate, nbar/wN, 1e-9)
	// Full-likelihood rows come first, best first.
	prev := math.Inf(-1)
	for _, r := range rep.Rows {
		if r.Family != FamilyFull || !r.Ranked {
			break
		}
		if r.Criterion < prev {
			t.Errorf("rows not sorted by criterion")
		}
		prev = r.Criterion
	}
}

func TestTableOneModelAndUnknown(t *testing.T) {
	h := readHistoryCSVForTest(t, "testdata/mth-invented.csv")
	rep, err := Table(h, TableOptions{Models: []string{"Chao-Mh"}})
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Rows) != 1 || rep.Rows[0].ID != "chao-mh" || rep.Rows[0].Result == nil {
		t.Fatalf("rows %+v", rep.Rows)
	}
	if _, err := Table(h, TableOptions{Models: []string{"nonesuch"}}); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("unknown model: %v", err)
	}
	// A model named explicitly that does not apply reports why.
	rep, err = Table(h, TableOptions{Models: []string{"chapman"}})
	if err != nil || len(rep.Rows) != 1 || !strings.Contains(rep.Rows[0].Error, "2 occasions") {
		t.Errorf("chapman on 8 occasions: %v %+v", err, rep.Rows)
	}
}

func TestTableFailuresStayInRows(t *testing.T) {
	// No recaptures: every model fails, the table does not.
	h := &estimators.Histories{Caught: [][]bool{{true, false, false}, {false, true, false}, {false, false, true}}}
	rep, err := Table(h, TableOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Rows) == 0 {
		t.Fatal("no rows")
	}
	for _, r := range rep.Rows {
		if r.Result != nil && !r.Result.Boundary {
			t.Errorf("%s gave an estimate without recaptures: %+v", r.ID, r.Result.N)
		}
		if r.Result == nil && r.Error == "" {
			t.Errorf("%s: no error text", r.ID)
		}
	}
	// Single occasion and empty data: errors, no panic.
	if _, err := Table(&estimators.Histories{}, TableOptions{}); !errors.Is(err, estimators.ErrNoData) {
		t.Errorf("empty: %v", err)
	}
	rep, err = Table(&estimators.Histories{Caught: [][]bool{{true}, {true}}}, TableOptions{})
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range rep.Rows {
		if r.Result != nil {
			t.Errorf("%s estimated N from one occasion", r.ID)
		}
	}
	// Every animal caught every time: boundary estimates equal to the
	// number caught, or errors; never NaN.
	all := &estimators.Histories{Caught: [][]bool{{true, true, true}, {true, true, true}, {true, true, true}}}
	rep, err = Table(all, TableOptions{})
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range rep.Rows {
		if r.Result != nil {
			checkN(t, r.Result, 3)
		}
	}
}

func TestTableCovariates(t *testing.T) {
	h := readHistoryCSVForTest(t, "testdata/mth-invented.csv")
	mass := make([]float64, h.Animals())
	for i := range mass {
		mass[i] = 20 + float64(i%7)
	}
	h.Covariates = map[string][]float64{"mass": mass}
	rep, err := Table(h, TableOptions{Models: []string{"huggins", "huggins-covariates"}})
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Rows) != 2 {
		t.Fatalf("rows %+v", rep.Rows)
	}
	for _, r := range rep.Rows {
		if r.Result == nil {
			t.Fatalf("%s: %s", r.ID, r.Error)
		}
		if !r.Ranked {
			t.Errorf("%s not ranked among the conditional models", r.ID)
		}
	}
	if rep.ConditionalAveragedN == nil || rep.AveragedN != nil {
		t.Errorf("averages: %+v %+v", rep.AveragedN, rep.ConditionalAveragedN)
	}
}

// BenchmarkTable is the whole model table (M0, Mt, Mb, Mh, Mth, Mtb,
// Huggins with and without the mass covariate, jackknife, Chao, Schnabel,
// Schumacher-Eschmeyer) on the ~10,000-animal, 15-occasion population of
// BenchmarkM0; report it as a ratio to BenchmarkM0 from the same run.
func BenchmarkTable(b *testing.B) {
	h := benchHistories()
	b.ReportMetric(float64(h.Animals()), "animals")
	b.ResetTimer()
	for b.Loop() {
		rep, err := Table(h, TableOptions{})
		if err != nil {
			b.Fatal(err)
		}
		for _, r := range rep.Rows {
			if r.Result == nil {
				b.Fatalf("%s: %s", r.ID, r.Error)
			}
		}
	}
}

// BenchmarkTableNoLikelihood is the part of the table without a
// likelihood (jackknife, Chao Mh/Mt/Mth, Schnabel, Schumacher-Eschmeyer).
func BenchmarkTableNoLikelihood(b *testing.B) {
	h := benchHistories()
	opts := TableOptions{Models: []string{"jackknife", "chao-mh", "chao-mt", "chao-mth", "schnabel", "schumacher-eschmeyer"}}
	b.ResetTimer()
	for b.Loop() {
		if _, err := Table(h, opts); err != nil {
			b.Fatal(err)
		}
	}
}

func ExampleTable() {
	// Five invented animals over four occasions.
	h := &estimators.Histories{Caught: [][]bool{
		{true, true, false, true},
		{true, false, false, false},
		{false, true, true, false},
		{false, false, true, true},
		{false, true, false, false},
	}}
	rep, err := Table(h, TableOptions{Models: []string{"chao-mh", "schnabel"}})
	if err != nil {
		panic(err)
	}
	for _, r := range rep.Rows {
		fmt.Printf("%s: N = %.2f\n", r.Name, r.Result.N.Estimate)
	}
	// Output:
	// Chao Mh: N = 6.00
	// Schnabel (Chapman +1): N = 5.00
}

// TestModelSelectionHandCalculation checks AICc, Δ, Akaike weights, the
// model-averaged N and its unconditional SE against the formulas of
// Burnham & Anderson (2002): AICc = −2 lnL + 2K + 2K(K+1)/(n−K−1) (eq.
// 2.2, Hurvich & Tsai 1989), w_i = exp(−Δ_i/2)/Σ_r exp(−Δ_r/2), N̄ = Σ w_i
// N_i (eq. 4.1) and SE(N̄) = Σ w_i sqrt(var(N_i) + (N_i − N̄)²) (eq. 4.9;
// equation numbers from memory). No printed table with all of these
// digits is remembered, so this is a hand calculation: first on a small
// invented table whose values were worked out separately (python, printed
// to full precision in the comments), then on every ranked row of the
// model table of the invented 8-occasion histories.
func TestModelSelectionHandCalculation(t *testing.T) {
	mk := func(ll float64, k int, n, se float64) *estimators.Result {
		return &estimators.Result{HasLikelihood: true, LogLik: ll, Params: k, SampleSize: 50, N: &estimators.Value{Estimate: n, SE: se}}
	}
	// Invented: lnL −100, −101, −103.5 with K = 2, 3, 4, n = 50.
	res := []*estimators.Result{mk(-103.5, 4, 150, 25), mk(-100, 2, 120, 10), mk(-101, 3, 130, 15)}
	sel := estimators.Select(res, 0, 100)
	want := []struct{ aicc, delta, w float64 }{
		{204.25531914893617, 0, 0.8917157462466718},                  // 200 + 4 + 12/47
		{208.52173913043478, 4.266419981498615, 0.10562947175440185}, // 202 + 6 + 24/46
		{215.88888888888889, 11.63356973995272, 0.002654781998926413},
	}
	for i, w := range want {
		r := sel.Rows[i]
		near(t, fmt.Sprintf("AICc row %d", i), r.Criterion, w.aicc, 1e-9)
		near(t, fmt.Sprintf("Δ row %d", i), r.Delta, w.delta, 1e-9)
		near(t, fmt.Sprintf("weight row %d", i), r.Weight, w.w, 1e-12)
	}
	near(t, "averaged N", sel.AveragedN.Estimate, 121.13593817751183, 1e-9)
	near(t, "unconditional SE", sel.AveragedN.SE, 10.916293422408625, 1e-9)

	// The model table: recompute every ranked full-likelihood row.
	h := readHistoryCSVForTest(t, "testdata/mth-invented.csv")
	rep, err := Table(h, TableOptions{})
	if err != nil {
		t.Fatal(err)
	}
	type row struct{ aicc, n, se float64 }
	var rs []row
	best := math.Inf(1)
	for _, r := range rep.Rows {
		if r.Family != FamilyFull || !r.Ranked {
			continue
		}
		k, n := float64(r.Result.Params), float64(rep.Animals) // n = Mt1
		a := -2*r.Result.LogLik + 2*k + 2*k*(k+1)/(n-k-1)
		near(t, r.ID+" AICc", r.Criterion, a, 1e-9)
		rs = append(rs, row{a, r.Result.N.Estimate, r.Result.N.SE})
		best = math.Min(best, a)
	}
	if len(rs) < 4 {
		t.Fatalf("only %d ranked full-likelihood rows", len(rs))
	}
	total := 0.0
	for _, r := range rs {
		total += math.Exp(-(r.aicc - best) / 2)
	}
	nBar := 0.0
	i := 0
	for _, r := range rep.Rows {
		if r.Family != FamilyFull || !r.Ranked {
			continue
		}
		w := math.Exp(-(rs[i].aicc-best)/2) / total
		near(t, r.ID+" Δ", r.Delta, rs[i].aicc-best, 1e-9)
		near(t, r.ID+" weight", r.Weight, w, 1e-12)
		nBar += w * rs[i].n
		i++
	}
	se := 0.0
	i = 0
	for _, r := range rep.Rows {
		if r.Family != FamilyFull || !r.Ranked {
			continue
		}
		se += r.Weight * math.Sqrt(rs[i].se*rs[i].se+(rs[i].n-nBar)*(rs[i].n-nBar))
		i++
	}
	near(t, "table averaged N", rep.AveragedN.Estimate, nBar, 1e-9)
	near(t, "table unconditional SE", rep.AveragedN.SE, se, 1e-9)
}

// TestTableAverageOfBoundaryEstimates: when the models carrying the weight
// sit at N = Mt1 (every animal probably caught), the model-averaged N is
// flagged; on data with interior estimates it is not.
func TestTableAverageOfBoundaryEstimates(t *testing.T) {
	// Invented: 8 animals, 3 occasions, nearly all recaptured; two lost on
	// capture.
	h := rows("110", "011", "100", "111", "010", "101", "001", "110")
	h.Removed = []bool{false, true, false, false, true, false, false, false}
	rep, err := Table(h, TableOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if rep.AveragedN == nil || len(rep.AveragedWarnings) != 1 || !strings.Contains(rep.AveragedWarnings[0], "M0") {
		t.Errorf("averaged N %+v, warnings %q", rep.AveragedN, rep.AveragedWarnings)
	}
	rep, err = Table(readHistoryCSVForTest(t, "testdata/mth-invented.csv"), TableOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.AveragedWarnings) != 0 {
		t.Errorf("interior estimates, yet warnings %q", rep.AveragedWarnings)
	}
}
