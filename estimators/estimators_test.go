package estimators

import (
	"errors"
	"math"
	"testing"
)

// The expected numbers below are worked by hand (to the digits shown) from
// the published formulas named beside each check; no printed worked
// example is reproduced here. The closed and open packages check these
// functions again through whole model tables.

func near(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if math.IsNaN(got) || math.Abs(got-want) > tol {
		t.Errorf("%s = %.10g, want %.10g (± %g)", what, got, want, tol)
	}
}

func TestAICc(t *testing.T) {
	// AICc = -2 lnL + 2K + 2K(K+1)/(n-K-1) (Hurvich & Tsai 1989; Burnham
	// & Anderson 2002, ch. 2; section from memory): lnL = -100, K = 3, n = 50 gives
	// 200 + 6 + 24/46.
	near(t, "AICc(-100, 3, 50)", AICc(-100, 3, 50), 206.52173913043478, 1e-12)
	// With K = 0 the criterion is -2 lnL.
	near(t, "AICc(-50, 0, 10)", AICc(-50, 0, 10), 100, 1e-12)
	// n - K - 1 <= 0: the correction is undefined; the model must sort
	// last, never win.
	for _, n := range []int{4, 3} {
		if got := AICc(-1, 3, n); !math.IsInf(got, 1) {
			t.Errorf("AICc(-1, 3, %d) = %g, want +Inf", n, got)
		}
	}
}

func TestQAICc(t *testing.T) {
	// QAICc = -2 lnL/c + 2K + 2K(K+1)/(n-K-1) with K counting c-hat as
	// one more parameter (Burnham & Anderson 2002, ch. 2; from memory): lnL = -100,
	// 3 parameters + c-hat, n = 50, c-hat = 2 gives 100 + 8 + 40/45.
	near(t, "QAICc(-100, 3, 50, 2)", QAICc(-100, 3, 50, 2), 108.88888888888889, 1e-12)
	// c-hat of 1 or less means no overdispersion: plain AICc.
	for _, c := range []float64{1, 0.8} {
		near(t, "QAICc with c-hat <= 1", QAICc(-100, 3, 50, c), AICc(-100, 3, 50), 0)
	}
}

func TestSelectWeightsAndAveragedN(t *testing.T) {
	// Three models with K = 0, so their AICc are exactly 100, 102, 106
	// (-2 lnL). Akaike weights w_i = exp(-Δ_i/2) / Σ exp(-Δ_j/2)
	// (Burnham & Anderson 2002, ch. 2;
	// equation number from memory): Δ = 0, 2, 6 gives
	// 1, e^-1, e^-3 normalised.
	res := []*Result{
		{Method: "b", HasLikelihood: true, LogLik: -51, SampleSize: 40, N: &Value{Estimate: 120, SE: 15}},
		{Method: "c", HasLikelihood: true, LogLik: -53, SampleSize: 40, N: &Value{Estimate: 150, SE: 20}},
		{Method: "no likelihood", N: &Value{Estimate: 500, SE: 1}},
		{Method: "a", HasLikelihood: true, LogLik: -50, SampleSize: 40, N: &Value{Estimate: 100, SE: 10}},
	}
	sel := Select(res, 1, 90)
	if sel.CriterionName != "AICc" {
		t.Errorf("criterion %q, want AICc", sel.CriterionName)
	}
	wantOrder := []string{"a", "b", "c", "no likelihood"}
	wantDelta := []float64{0, 2, 6, math.Inf(1)}
	wantWeight := []float64{0.7053845126982412, 0.25949646034241913, 0.03511902695933973, 0}
	for i, row := range sel.Rows {
		if row.Result.Method != wantOrder[i] {
			t.Fatalf("row %d is %q, want %q", i, row.Result.Method, wantOrder[i])
		}
		if math.IsInf(wantDelta[i], 1) {
			if !math.IsInf(row.Delta, 1) || row.Weight != 0 {
				t.Errorf("%s: delta %g weight %g, want +Inf and 0", row.Result.Method, row.Delta, row.Weight)
			}
			continue
		}
		near(t, row.Result.Method+" delta", row.Delta, wantDelta[i], 1e-12)
		near(t, row.Result.Method+" weight", row.Weight, wantWeight[i], 1e-12)
	}
	// Model-averaged N = Σ w_i N_i and its unconditional SE
	// Σ w_i sqrt(var_i + (N_i - N̄)²) (Burnham & Anderson 2002, eqs. 4.1
	// and 4.9, as the function's doc cites them): 106.9459 and 15.4157 from the weights above.
	if sel.AveragedN == nil {
		t.Fatal("no averaged N")
	}
	near(t, "averaged N", sel.AveragedN.Estimate, 106.94588055481537, 1e-9)
	near(t, "averaged N SE", sel.AveragedN.SE, 15.415741601270991, 1e-9)
	if sel.AveragedN.Kind != CILogNormal || sel.AveragedN.Low < 90 {
		t.Errorf("averaged interval %+v, want log-normal with its floor at the 90 caught", sel.AveragedN.Interval)
	}

	// With c-hat 2 the table ranks by QAICc.
	if q := Select(res, 2, 90); q.CriterionName != "QAICc" {
		t.Errorf("criterion with c-hat 2: %q, want QAICc", q.CriterionName)
	}
	// No model with a likelihood: nothing ranks, nothing is averaged.
	none := Select([]*Result{{Method: "Chapman", N: &Value{Estimate: 10, SE: 1}}}, 1, 0)
	if none.AveragedN != nil || !math.IsInf(none.Rows[0].Delta, 1) {
		t.Errorf("table without likelihoods: %+v", none)
	}
}

func TestLogNormalIntervalN(t *testing.T) {
	// Chao (1987), eq. 13: N = 120, SE = 10, 100 animals caught: f0 = 20,
	// C = exp(1.96 sqrt(ln(1 + 100/400))) = 2.52404, interval
	// (100 + 20/C, 100 + 20 C).
	iv := LogNormalIntervalN(120, 10, 100)
	near(t, "low", iv.Low, 107.92389645503523, 1e-9)
	near(t, "high", iv.High, 150.4802154179867, 1e-9)
	if iv.Kind != CILogNormal || iv.Level != DefaultLevel {
		t.Errorf("kind %q level %g", iv.Kind, iv.Level)
	}
	// Every animal believed seen (N = caught): the interval is the point.
	if iv := LogNormalIntervalN(100, 5, 100); iv.Low != 100 || iv.High != 100 {
		t.Errorf("N = caught: %+v, want (100, 100)", iv)
	}
	// The lower bound is never below the number caught (property of the
	// form, checked over a range of SEs).
	for _, se := range []float64{0.1, 1, 10, 100, 1000} {
		if iv := LogNormalIntervalN(130, se, 100); iv.Low < 100 || iv.High < 130 {
			t.Errorf("SE %g: %+v, want low >= 100 and high >= N", se, iv)
		}
	}
}

func TestLogitInterval(t *testing.T) {
	// Delta method on the logit scale (e.g. Lebreton et al. 1992):
	// p = 0.6, SE 0.05, SE(logit p) = 0.05 / (0.6 · 0.4); the bounds are
	// expit(logit 0.6 ∓ 1.96 · 0.208333).
	iv := LogitInterval(0.6, 0.05)
	near(t, "low", iv.Low, 0.49928481998664986, 1e-12)
	near(t, "high", iv.High, 0.6929167413997426, 1e-12)
	// On the boundary the interval is the point.
	for _, p := range []float64{0, 1} {
		if iv := LogitInterval(p, 0.1); iv.Low != p || iv.High != p {
			t.Errorf("p = %g: %+v", p, iv)
		}
	}
}

func TestMaximizeBinomial(t *testing.T) {
	// 30 successes in 100 trials, fitted on the logit scale: the maximum
	// is logit(0.3) and the observed information n p (1-p) = 21 gives
	// SE(logit p) = 1/sqrt(21) (common practice: the binomial's Fisher
	// information).
	const x, n = 30.0, 100.0
	lnL := func(v []float64) float64 {
		p := Expit(v[0])
		return x*math.Log(p) + (n-x)*math.Log(1-p)
	}
	fit, err := Maximize(lnL, nil, []float64{0})
	if err != nil {
		t.Fatal(err)
	}
	near(t, "logit p", fit.X[0], Logit(0.3), 1e-5)
	near(t, "SE", fit.SE(0), 0.2182178902359924, 1e-4)
	near(t, "lnL", fit.LogLik, lnL([]float64{Logit(0.3)}), 1e-9)
}

func TestHistories(t *testing.T) {
	row, err := ParseHistory("0110")
	if err != nil || len(row) != 4 || row[0] || !row[1] || !row[2] || row[3] {
		t.Fatalf("ParseHistory(0110) = %v, %v", row, err)
	}
	if _, err := ParseHistory("01x0"); !errors.Is(err, ErrInvalidInput) {
		t.Errorf("ParseHistory(01x0): %v, want ErrInvalidInput", err)
	}
	for _, tc := range []struct {
		name string
		h    *Histories
		want error
	}{
		{"nil", nil, ErrNoData},
		{"no animals", &Histories{}, ErrNoData},
		{"no occasions", &Histories{Caught: [][]bool{{}}}, ErrNoData},
		{"ragged", &Histories{Caught: [][]bool{{true, false}, {true}}}, ErrInvalidInput},
		{"never caught", &Histories{Caught: [][]bool{{true, false}, {false, false}}}, ErrInvalidInput},
		{"removed flags", &Histories{Caught: [][]bool{{true}}, Removed: []bool{true, false}}, ErrInvalidInput},
		{"covariate length", &Histories{Caught: [][]bool{{true}}, Covariates: map[string][]float64{"mass": {1, 2}}}, ErrInvalidInput},
		{"group length", &Histories{Caught: [][]bool{{true}}, Groups: []string{}}, ErrInvalidInput},
		{"fine", &Histories{Caught: [][]bool{{true, false}, {false, true}}, Removed: []bool{false, true}}, nil},
	} {
		err := tc.h.Validate()
		if tc.want == nil && err != nil || tc.want != nil && !errors.Is(err, tc.want) {
			t.Errorf("%s: %v, want %v", tc.name, err, tc.want)
		}
	}
}
