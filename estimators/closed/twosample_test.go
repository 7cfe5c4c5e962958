package closed

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"testing"

	"tagtally/estimators"
)

// independent holds testdata/independent.json (see testdata/README.md).
type independent struct {
	TwoSample []struct {
		M, C, R         int
		PoissonMean     [2]float64 `json:"poisson_mean"`
		BinomialP       [2]float64 `json:"binomial_p"`
		ChapmanPoisson  [2]float64 `json:"chapman_poisson"`
		ChapmanBinomial [2]float64 `json:"chapman_binomial"`
		LPBinomial      [2]float64 `json:"lp_binomial"`
	} `json:"two_sample"`
	Census []struct {
		Caught        []float64  `json:"caught"`
		Recaptured    []float64  `json:"recaptured"`
		SchnabelPlus1 float64    `json:"schnabel_plus1"`
		Schnabel      float64    `json:"schnabel"`
		SEN           float64    `json:"se_N"`
		SELimits      [2]float64 `json:"se_limits"`
		Plus1Limits   [2]float64 `json:"schnabel_plus1_limits"`
	} `json:"census"`
	Removal []struct {
		Catches     []int   `json:"catches"`
		ZippinN     float64 `json:"zippin_N"`
		ZippinP     float64 `json:"zippin_p"`
		ZippinVar   float64 `json:"zippin_var_info"`
		ZippinVarP  float64 `json:"zippin_varp_info"`
		CarleStrubN float64 `json:"carle_strub_N"`
	} `json:"removal"`
	JackknifeBrute struct {
		Freqs []int     `json:"freqs"`
		N     []float64 `json:"N"`
	} `json:"jackknife_brute"`
	JackknifeCottontail []float64 `json:"jackknife_cottontail_closed_form"`
	ChaoMth             struct {
		N, Var float64
		S      int
	} `json:"chao_mth_invented"`
}

func loadIndependent(t *testing.T) independent {
	t.Helper()
	b, err := os.ReadFile("testdata/independent.json")
	if err != nil {
		t.Fatal(err)
	}
	var v independent
	if err := json.Unmarshal(b, &v); err != nil {
		t.Fatal(err)
	}
	return v
}

func near(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if math.IsNaN(got) || math.Abs(got-want) > tol {
		t.Errorf("%s = %.6g, want %.6g (±%g)", what, got, want, tol)
	}
}

func TestTwoSampleFormulas(t *testing.T) {
	s := TwoSample{M: 120, C: 95, R: 28} // invented counts
	lp, err := LincolnPetersen(s, TwoSampleCINormal)
	if err != nil {
		t.Fatal(err)
	}
	// Hand formula: 120·95/28 = 407.142857; var = 120²·95·67/28³ = 4194.44
	near(t, "LP N", lp.N.Estimate, 407.142857, 1e-5)
	near(t, "LP SE", lp.N.SE, math.Sqrt(120.0*120*95*67/(28.0*28*28)), 1e-9)
	ch, err := Chapman(s, TwoSampleCINormal)
	if err != nil {
		t.Fatal(err)
	}
	// Hand formula: 121·96/29 - 1 = 399.551724; Seber (1970) variance
	// 121·96·92·67/(29²·30) = 2838.43
	near(t, "Chapman N", ch.N.Estimate, 121.0*96/29-1, 1e-9)
	near(t, "Chapman var", ch.N.SE*ch.N.SE, 121.0*96*92*67/(29.0*29*30), 1e-6)
	near(t, "Chapman normal low", ch.N.Low, ch.N.Estimate-1.959964*ch.N.SE, 1e-3)
	ba, err := Bailey(s, TwoSampleCINormal)
	if err != nil {
		t.Fatal(err)
	}
	// Hand formula: 120·96/29 = 397.241379; var = 120²·96·67/(29²·30)
	near(t, "Bailey N", ba.N.Estimate, 120.0*96/29, 1e-9)
	near(t, "Bailey var", ba.N.SE*ba.N.SE, 120.0*120*96*67/(29.0*29*30), 1e-6)
}

func TestTwoSampleIntervalsAgainstScipy(t *testing.T) {
	ind := loadIndependent(t)
	for _, c := range ind.TwoSample {
		s := TwoSample{M: c.M, C: c.C, R: c.R}
		lo, hi := PoissonMeanInterval(s.R)
		near(t, "Poisson low", lo, c.PoissonMean[0], 1e-6) // scipy.stats.chi2
		near(t, "Poisson high", hi, c.PoissonMean[1], 1e-6)
		blo, bhi := BinomialProportionInterval(s.R, s.C)
		near(t, "binomial low", blo, c.BinomialP[0], 1e-7) // scipy.stats.beta
		near(t, "binomial high", bhi, c.BinomialP[1], 1e-7)
		r, err := Chapman(s, TwoSampleCIPoisson)
		if err != nil {
			t.Fatal(err)
		}
		if r.N.Kind != estimators.CIPoisson {
			t.Errorf("kind %q", r.N.Kind)
		}
		near(t, "Chapman Poisson low", r.N.Low, c.ChapmanPoisson[0], 1e-3)
		near(t, "Chapman Poisson high", r.N.High, c.ChapmanPoisson[1], 1e-3)
		r, _ = Chapman(s, TwoSampleCIBinomial)
		near(t, "Chapman binomial low", r.N.Low, c.ChapmanBinomial[0], 1e-3)
		near(t, "Chapman binomial high", r.N.High, c.ChapmanBinomial[1], 1e-3)
		r, _ = LincolnPetersen(s, TwoSampleCIBinomial)
		near(t, "LP binomial low", r.N.Low, c.LPBinomial[0], 1e-3)
		near(t, "LP binomial high", r.N.High, c.LPBinomial[1], 1e-3)
	}
}

func TestTwoSampleAutoInterval(t *testing.T) {
	// Rule of thumb (common practice): R/C > 0.1 binomial; else R < 50 Poisson; else normal.
	for _, c := range []struct {
		s    TwoSample
		kind string
	}{
		{TwoSample{M: 120, C: 95, R: 28}, estimators.CIBinomial},
		{TwoSample{M: 400, C: 300, R: 20}, estimators.CIPoisson},
		{TwoSample{M: 2000, C: 900, R: 60}, estimators.CINormal},
	} {
		r, err := Chapman(c.s, TwoSampleCIAuto)
		if err != nil {
			t.Fatal(err)
		}
		if r.N.Kind != c.kind {
			t.Errorf("%+v: kind %q, want %q", c.s, r.N.Kind, c.kind)
		}
	}
}

func TestTwoSampleBadInput(t *testing.T) {
	for _, c := range []struct {
		s    TwoSample
		want error
	}{
		{TwoSample{M: 10, C: 10, R: 0}, estimators.ErrNoRecaptures},
		{TwoSample{M: -1, C: 10, R: 0}, estimators.ErrInvalidInput},
		{TwoSample{M: 0, C: 0, R: 0}, estimators.ErrNoData},
		{TwoSample{M: 5, C: 10, R: 6}, estimators.ErrInvalidInput},
		{TwoSample{M: 10, C: 5, R: 6}, estimators.ErrInvalidInput},
	} {
		for _, f := range []func(TwoSample, TwoSampleCI) (*estimators.Result, error){LincolnPetersen, Chapman, Bailey} {
			if _, err := f(c.s, TwoSampleCIAuto); !errors.Is(err, c.want) {
				t.Errorf("%+v: err %v, want %v", c.s, err, c.want)
			}
		}
	}
	// Every animal of the second sample marked and every mark recaptured:
	// a flagged boundary estimate, not NaN.
	r, err := Chapman(TwoSample{M: 20, C: 20, R: 20}, TwoSampleCIAuto)
	if err != nil {
		t.Fatal(err)
	}
	if !r.Boundary || r.N.Estimate != 20 || r.N.SE != 0 {
		t.Errorf("all recaptured: %+v boundary=%v", r.N, r.Boundary)
	}
}

func TestTwoSampleFromHistories(t *testing.T) {
	h := &estimators.Histories{
		Caught:  [][]bool{{true, true}, {true, false}, {false, true}, {true, false}, {true, true}},
		Removed: []bool{false, false, false, true, false},
	}
	s, err := TwoSampleFromHistories(h)
	if err != nil {
		t.Fatal(err)
	}
	if s != (TwoSample{M: 3, C: 3, R: 2, LostFirst: 1}) {
		t.Errorf("got %+v", s)
	}
	// Losses in the first sample are added back to the estimate.
	withLoss, err := Chapman(TwoSample{M: 120, C: 95, R: 28, LostFirst: 7}, TwoSampleCIPoisson)
	if err != nil {
		t.Fatal(err)
	}
	noLoss, _ := Chapman(TwoSample{M: 120, C: 95, R: 28}, TwoSampleCIPoisson)
	near(t, "N with losses", withLoss.N.Estimate, noLoss.N.Estimate+7, 1e-9)
	near(t, "low with losses", withLoss.N.Low, noLoss.N.Low+7, 1e-9)
	near(t, "SE with losses", withLoss.N.SE, noLoss.N.SE, 0)
	h.Caught = append(h.Caught[:0:0], []bool{true, true, true})
	h.Removed = nil
	if _, err := TwoSampleFromHistories(h); !errors.Is(err, estimators.ErrTooFewOccasions) {
		t.Errorf("3 occasions: %v", err)
	}
}

// Property: no two-sample estimate or lower limit falls below the number of
// distinct animals caught, and nothing is NaN.
func TestTwoSampleNeverBelowCaught(t *testing.T) {
	for m := 1; m <= 30; m += 3 {
		for c := 1; c <= 30; c += 4 {
			for r := 1; r <= min(m, c); r++ {
				s := TwoSample{M: m, C: c, R: r}
				for _, f := range []func(TwoSample, TwoSampleCI) (*estimators.Result, error){LincolnPetersen, Chapman, Bailey} {
					for ci := TwoSampleCIAuto; ci <= TwoSampleCIBinomial; ci++ {
						res, err := f(s, ci)
						if err != nil {
							t.Fatal(err)
						}
						checkN(t, res, s.Caught())
					}
				}
			}
		}
	}
}

// checkN asserts the shared invariants of an abundance result.
func checkN(t *testing.T, r *estimators.Result, caught int) {
	t.Helper()
	n := r.N
	for _, v := range []float64{n.Estimate, n.SE, n.Low, n.High} {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			t.Fatalf("%s: non-finite value in %+v", r.Method, *n)
		}
	}
	if n.Estimate < float64(caught)-1e-9 || n.Low < float64(caught)-1e-9 {
		t.Fatalf("%s: N %.3f or low %.3f below %d caught", r.Method, n.Estimate, n.Low, caught)
	}
	if n.Low > n.Estimate+1e-9 || n.High < n.Estimate-1e-9 {
		t.Fatalf("%s: interval (%.3f, %.3f) does not contain %.3f", r.Method, n.Low, n.High, n.Estimate)
	}
	if n.Kind == "" || len(r.Assumptions) == 0 {
		t.Fatalf("%s: missing interval kind or assumptions", r.Method)
	}
}

func ExampleChapman() {
	// Invented counts: 120 marked, 95 in the second sample, 28 of them marked.
	r, err := Chapman(TwoSample{M: 120, C: 95, R: 28}, TwoSampleCIAuto)
	if err != nil {
		panic(err)
	}
	fmt.Printf("N = %.1f, SE %.1f, 95%% CI (%.1f, %.1f), %s\n", r.N.Estimate, r.N.SE, r.N.Low, r.N.High, r.N.Kind)
	// Output:
	// N = 399.6, SE 53.3, 95% CI (299.0, 564.8), binomial on the recapture proportion
}
