package demography

import (
	"encoding/csv"
	"errors"
	"math"
	"os"
	"strconv"
	"testing"

	"tagtally/estimators"
)

func near(a, b, tol float64) bool { return math.Abs(a-b) <= tol }

// TestBinomialAgainstScipy compares the exact interval and test with
// scipy.stats.binomtest (Debian python3-scipy 1.10.1), run by
// testdata/binomial.py with output committed in testdata/binomial.csv.
func TestBinomialAgainstScipy(t *testing.T) {
	f, err := os.Open("testdata/binomial.csv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range rows[1:] {
		num := func(i int) float64 {
			v, err := strconv.ParseFloat(r[i], 64)
			if err != nil {
				t.Fatal(err)
			}
			return v
		}
		x, n, p0 := int(num(0)), int(num(1)), num(2)
		iv, err := ClopperPearson(x, n, 0.95)
		if err != nil {
			t.Fatal(err)
		}
		if !near(iv.Low, num(3), 1e-9) || !near(iv.High, num(4), 1e-9) {
			t.Errorf("%d/%d: interval (%.12f, %.12f), scipy (%.12f, %.12f)", x, n, iv.Low, iv.High, num(3), num(4))
		}
		p, err := ExactBinomialTest(x, n, p0)
		if err != nil {
			t.Fatal(err)
		}
		if !near(p, num(5), 1e-9*math.Max(1e-3, num(5))) {
			t.Errorf("%d/%d vs %v: p %.12g, scipy %.12g", x, n, p0, p, num(5))
		}
	}
}

// TestClopperPearsonClosedForms: with x = 0 the upper limit solves
// (1-p)^n = α/2, so it is 1 - 0.025^(1/n); with x = n the lower limit is
// 0.025^(1/n) (Clopper & Pearson 1934; hand formula). For 0 of 10 that is
// 0.3085, the familiar table value (from memory).
func TestClopperPearsonClosedForms(t *testing.T) {
	for _, n := range []int{1, 3, 10, 57, 400} {
		iv, _ := ClopperPearson(0, n, 0.95)
		if want := 1 - math.Pow(0.025, 1/float64(n)); iv.Low != 0 || !near(iv.High, want, 1e-12) {
			t.Errorf("0/%d: %+v, want (0, %v)", n, iv, want)
		}
		iv, _ = ClopperPearson(n, n, 0.95)
		if want := math.Pow(0.025, 1/float64(n)); iv.High != 1 || !near(iv.Low, want, 1e-12) {
			t.Errorf("%d/%d: %+v, want (%v, 1)", n, n, iv, want)
		}
	}
	iv, _ := ClopperPearson(0, 10, 0.95)
	if !near(iv.High, 0.3085, 5e-5) {
		t.Errorf("0/10 upper %v, table 0.3085", iv.High)
	}
}

// TestBinomialTestHalfIsTwiceTail: for p0 = 0.5 the two-sided p-value is
// twice the smaller tail, capped at 1, summed here term by term with
// binomial coefficients (an independent hand computation).
func TestBinomialTestHalfIsTwiceTail(t *testing.T) {
	for n := 1; n <= 40; n++ {
		for x := 0; x <= n; x++ {
			lo, hi := 0.0, 0.0
			for k := 0; k <= n; k++ {
				pk := math.Exp(lchoose(n, k) - float64(n)*math.Ln2)
				if k <= x {
					lo += pk
				}
				if k >= x {
					hi += pk
				}
			}
			want := math.Min(1, 2*math.Min(lo, hi))
			got, _ := ExactBinomialTest(x, n, 0.5)
			if !near(got, want, 1e-12) {
				t.Fatalf("%d/%d: p %v, twice the tail %v", x, n, got, want)
			}
		}
	}
}

func lchoose(n, k int) float64 {
	a, _ := math.Lgamma(float64(n + 1))
	b, _ := math.Lgamma(float64(k + 1))
	c, _ := math.Lgamma(float64(n - k + 1))
	return a - b - c
}

func TestBinomialErrors(t *testing.T) {
	for _, c := range [][2]int{{0, 0}, {-1, 5}, {6, 5}} {
		if _, err := ClopperPearson(c[0], c[1], 0.95); !errors.Is(err, estimators.ErrInvalidInput) {
			t.Errorf("ClopperPearson%v err = %v", c, err)
		}
		if _, err := ExactBinomialTest(c[0], c[1], 0.5); !errors.Is(err, estimators.ErrInvalidInput) {
			t.Errorf("ExactBinomialTest%v err = %v", c, err)
		}
	}
	for _, lv := range []float64{0, 1, math.NaN(), -0.5} {
		if _, err := ClopperPearson(1, 5, lv); !errors.Is(err, estimators.ErrInvalidInput) {
			t.Errorf("level %v err = %v", lv, err)
		}
	}
	for _, p0 := range []float64{0, 1, math.NaN()} {
		if _, err := ExactBinomialTest(1, 5, p0); !errors.Is(err, estimators.ErrInvalidInput) {
			t.Errorf("p0 %v err = %v", p0, err)
		}
	}
}

func TestSexRatio(t *testing.T) {
	// 48 males of 75 sexed animals: scipy gives p = 0.020298 and the
	// exact interval (0.52090, 0.74768) (testdata/binomial.csv).
	r, err := SexRatio(48, 27, 4)
	if err != nil {
		t.Fatal(err)
	}
	if !near(r.P, 0.02029840699010744, 1e-12) || !r.Significant {
		t.Errorf("p %v significant %v", r.P, r.Significant)
	}
	if !near(r.ProportionMale.Low, 0.5208984128527637, 1e-9) || !near(r.ProportionMale.High, 0.74767761109319, 1e-9) {
		t.Errorf("interval %+v", r.ProportionMale.Interval)
	}
	// Hand arithmetic: p = 48/75 = 0.64, SE = sqrt(0.64·0.36/75), 48/27 males per female.
	if !near(r.ProportionMale.Estimate, 0.64, 1e-15) || !near(r.ProportionMale.SE, math.Sqrt(0.64*0.36/75), 1e-15) ||
		r.MalesPerFemale == nil || !near(*r.MalesPerFemale, 48.0/27, 1e-15) {
		t.Errorf("estimate %+v, ratio %v", r.ProportionMale, r.MalesPerFemale)
	}
	if r.ProportionMale.Kind != estimators.CIExact || len(r.Warnings) != 1 || len(r.Assumptions) == 0 {
		t.Errorf("kind %q warnings %v", r.ProportionMale.Kind, r.Warnings)
	}
	// All males: no ratio, SE 0, exact interval still informative.
	r, err = SexRatio(6, 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	if r.MalesPerFemale != nil || r.ProportionMale.SE != 0 || r.ProportionMale.High != 1 || !near(r.P, 2*math.Pow(0.5, 6), 1e-15) {
		t.Errorf("all males: %+v p %v", r.ProportionMale, r.P)
	}
	if _, err := SexRatio(0, 0, 5); !errors.Is(err, estimators.ErrNoData) {
		t.Errorf("only unknowns: err = %v", err)
	}
	if _, err := SexRatio(-1, 3, 0); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("negative: err = %v", err)
	}
}

// TestClopperPearsonCoverage: the exact interval's coverage is at least
// its level for every true proportion (Clopper & Pearson 1934). Computed
// exactly by summing binomial probabilities over outcomes whose interval
// covers p, on a grid of p for n = 25.
func TestClopperPearsonCoverage(t *testing.T) {
	const n = 25
	ivs := make([]estimators.Interval, n+1)
	for x := 0; x <= n; x++ {
		ivs[x], _ = ClopperPearson(x, n, 0.95)
	}
	for i := 1; i < 200; i++ {
		p := float64(i) / 200
		cov := 0.0
		for x := 0; x <= n; x++ {
			if ivs[x].Low <= p && p <= ivs[x].High {
				cov += math.Exp(lchoose(n, x) + float64(x)*math.Log(p) + float64(n-x)*math.Log1p(-p))
			}
		}
		if cov < 0.95-1e-9 {
			t.Errorf("p = %v: coverage %v below 0.95", p, cov)
		}
	}
}
