package closed

import (
	"errors"
	"fmt"
	"math"
	"os"
	"strings"
	"testing"

	"tagtally/estimators"
)

func TestChaoMhCottontail(t *testing.T) {
	f := cottontail(t)
	r, err := ChaoMh(f)
	if err != nil {
		t.Fatal(err)
	}
	// Chao (1987) formula on the cottontail frequencies: 76 + 43²/(2·16) = 133.78
	// (value given with the reference data, "formula").
	near(t, "Chao Mh N", r.N.Estimate, 133.78, 0.005)
	// Hand computation of Chao's (1987) variance: r = 43/16,
	// 16·(r⁴/4 + r³ + r²/2) = 577.03.
	q := 43.0 / 16
	near(t, "Chao Mh var", r.N.SE*r.N.SE, 16*(q*q*q*q/4+q*q*q+q*q/2), 1e-9)
	// Log-normal interval (Chao 1987) by hand: f0 = 57.78, C = exp(1.96 sqrt(ln(1+var/f0²))).
	f0 := 43.0 * 43 / 32
	c := math.Exp(1.959964 * math.Sqrt(math.Log(1+r.N.SE*r.N.SE/(f0*f0))))
	near(t, "Chao Mh low", r.N.Low, 76+f0/c, 1e-3)
	near(t, "Chao Mh high", r.N.High, 76+f0*c, 1e-3)
	checkN(t, r, 76)
}

// The multinomial delta method used for the other Chao estimators must
// reproduce Chao's (1987) closed-form variance for Mh.
func TestFrequencyDeltaVarianceMatchesChao1987(t *testing.T) {
	f := cottontail(t)
	g := func(x []float64) float64 { return freqSum(x) + x[0]*x[0]/(2*x[1]) }
	n := g(freqFloats(f))
	q := 43.0 / 16
	near(t, "delta var", frequencyDeltaVariance(g, f, n), 16*(q*q*q*q/4+q*q*q+q*q/2), 1e-4)
}

func TestChaoMtCottontail(t *testing.T) {
	f := cottontail(t)
	r, err := ChaoMt(f)
	if err != nil {
		t.Fatal(err)
	}
	// Chao (1989) formula (from memory) by hand: 76 + (17/18)·43²/32 = 130.57.
	near(t, "Chao Mt N", r.N.Estimate, 76+17.0/18*43*43/32, 1e-9)
	// Its variance against the multinomial delta form derived by hand:
	// d1 = 1 + c f1/f2, d2 = 1 - c f1²/(2 f2²), c = 17/18.
	cc := 17.0 / 18
	d1, d2 := 1+cc*43/16, 1-cc*43*43/(2*16*16)
	sd2 := d1*d1*43 + d2*d2*16 + 17
	sd := d1*43 + d2*16 + 17
	near(t, "Chao Mt var", r.N.SE*r.N.SE, sd2-sd*sd/r.N.Estimate, 1e-3)
}

func TestChaoMthAgainstScipy(t *testing.T) {
	ind := loadIndependent(t)
	h := readHistoryCSVForTest(t, "testdata/mth-invented.csv")
	r, err := ChaoMth(h)
	if err != nil {
		t.Fatal(err)
	}
	// scipy script: formula of Chao, Lee & Jeng (1992) and complex-step
	// delta-method variance.
	near(t, "Chao Mth N", r.N.Estimate, ind.ChaoMth.N, 1e-9)
	near(t, "Chao Mth var", r.N.SE*r.N.SE, ind.ChaoMth.Var, 1e-3)
	checkN(t, r, ind.ChaoMth.S)
}

func TestChaoDegenerate(t *testing.T) {
	// No recaptures.
	for _, f := range []func(Frequencies) (*estimators.Result, error){ChaoMh, ChaoMt} {
		if _, err := f(Frequencies{12, 0, 0}); !errors.Is(err, estimators.ErrNoRecaptures) {
			t.Errorf("no recaptures: %v", err)
		}
		if _, err := f(Frequencies{12}); !errors.Is(err, estimators.ErrTooFewOccasions) {
			t.Errorf("one occasion: %v", err)
		}
		// Nobody caught once: boundary N = S.
		r, err := f(Frequencies{0, 4, 3})
		if err != nil || !r.Boundary || r.N.Estimate != 7 {
			t.Errorf("f1 = 0: %v %+v", err, r)
		}
	}
	// f2 = 0: bias-corrected form S + f1(f1-1)/2 (hand formula: 9 + 6·5/2 = 24).
	r, err := ChaoMh(Frequencies{6, 0, 3})
	if err != nil {
		t.Fatal(err)
	}
	near(t, "Chao Mh f2=0", r.N.Estimate, 24, 1e-12)
	if len(r.Warnings) == 0 || r.N.SE <= 0 {
		t.Errorf("f2 = 0: want a warning and a positive SE, got %+v %v", r.N, r.Warnings)
	}
	// Every animal caught every time.
	h := &estimators.Histories{Caught: [][]bool{{true, true, true}, {true, true, true}}}
	r, err = ChaoMth(h)
	if err != nil || !r.Boundary || r.N.Estimate != 2 {
		t.Errorf("all caught every time: %v %+v", err, r)
	}
}

// readHistoryCSVForTest reads an id,history file into Histories.
func readHistoryCSVForTest(t *testing.T, path string) *estimators.Histories {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	h := &estimators.Histories{}
	for i, line := range strings.Split(strings.TrimSpace(string(b)), "\n") {
		if i == 0 {
			continue
		}
		parts := strings.Split(line, ",")
		row, err := estimators.ParseHistory(strings.TrimSpace(parts[1]))
		if err != nil {
			t.Fatal(err)
		}
		h.Caught = append(h.Caught, row)
	}
	return h
}

func ExampleChaoMh() {
	// Capture frequencies f_1..f_4 over four occasions (invented). By hand:
	// N = 48 + 30²/24 = 85.5; var = 12(2.5⁴/4 + 2.5³ + 2.5²/2) = 342.2.
	r, err := ChaoMh(Frequencies{30, 12, 5, 1})
	if err != nil {
		panic(err)
	}
	fmt.Printf("N = %.1f, SE %.1f, 95%% CI (%.1f, %.1f)\n", r.N.Estimate, r.N.SE, r.N.Low, r.N.High)
	// Output:
	// N = 85.5, SE 18.5, 95% CI (63.0, 141.6)
}
