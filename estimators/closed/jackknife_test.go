package closed

import (
	"encoding/csv"
	"errors"
	"math"
	"math/rand/v2"
	"os"
	"strconv"
	"testing"

	"tagtally/estimators"
)

// cottontail reads testdata/cottontail-frequencies.csv (Edwards & Eberhardt
// 1967, via Otis et al. 1978; frequencies from memory, see the README).
func cottontail(t *testing.T) Frequencies {
	t.Helper()
	fh, err := os.Open("testdata/cottontail-frequencies.csv")
	if err != nil {
		t.Fatal(err)
	}
	defer fh.Close()
	rows, err := csv.NewReader(fh).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	f := make(Frequencies, len(rows)-1)
	for i, r := range rows[1:] {
		k, _ := strconv.Atoi(r[0])
		v, err := strconv.Atoi(r[1])
		if err != nil || k != i+1 {
			t.Fatalf("row %v", r)
		}
		f[i] = v
	}
	return f
}

func TestJackknifeCoefficientsClosedForm(t *testing.T) {
	// Burnham & Overton (1978) closed forms (coefficients from memory),
	// checked for several T against the generalized-jackknife weights.
	for _, tt := range []int{6, 10, 18, 30} {
		T := float64(tt)
		a1, _ := JackknifeCoefficients(1, tt)
		near(t, "a11", a1[0], 1+(T-1)/T, 1e-7)
		near(t, "a21", a1[1], 1, 1e-7)
		a2, _ := JackknifeCoefficients(2, tt)
		near(t, "a12", a2[0], 1+(2*T-3)/T, 1e-7)
		near(t, "a22", a2[1], 1-(T-2)*(T-2)/(T*(T-1)), 1e-7)
		a3, _ := JackknifeCoefficients(3, tt)
		near(t, "a13", a3[0], 1+(3*T-6)/T, 1e-7)
		near(t, "a23", a3[1], 1-(3*T*T-15*T+19)/(T*(T-1)), 1e-7)
		near(t, "a33", a3[2], 1+math.Pow(T-3, 3)/(T*(T-1)*(T-2)), 1e-7)
		a4, _ := JackknifeCoefficients(4, tt)
		near(t, "a14", a4[0], 1+(4*T-10)/T, 1e-7)
		near(t, "a44", a4[3], 1-math.Pow(T-4, 4)/(T*(T-1)*(T-2)*(T-3)), 1e-7)
		a5, _ := JackknifeCoefficients(5, tt)
		near(t, "a15", a5[0], 1+(5*T-15)/T, 1e-7)
		near(t, "a55", a5[4], 1+math.Pow(T-5, 5)/(T*(T-1)*(T-2)*(T-3)*(T-4)), 1e-7)
		for _, a := range [][]float64{a1, a2, a3, a4, a5} {
			near(t, "a_T", a[tt-1], 1, 1e-7) // animals caught every time count once
		}
	}
}

func TestJackknifeAgainstBruteForceDeletion(t *testing.T) {
	ind := loadIndependent(t)
	f := Frequencies(ind.JackknifeBrute.Freqs)
	for k := 1; k <= 5; k++ {
		a, err := JackknifeCoefficients(k, len(f))
		if err != nil {
			t.Fatal(err)
		}
		n, _ := jkLinearEstimate(a, f)
		// scipy script: every subset of occasions deleted explicitly.
		near(t, "brute-force jackknife", n, ind.JackknifeBrute.N[k-1], 1e-8)
	}
}

func TestJackknifeCottontail(t *testing.T) {
	f := cottontail(t)
	ind := loadIndependent(t)
	r, err := Jackknife(f)
	if err != nil {
		t.Fatal(err)
	}
	for k := 1; k <= 3; k++ {
		// Closed forms evaluated in the scipy script: 116.61, 141.45, 158.48.
		near(t, "order N", r.Orders[k-1].N, ind.JackknifeCottontail[k-1], 1e-8)
	}
	// Hand computation of the first-order variance: Σ a² f - N with
	// a_1 = 1 + 17/18: (35/18)²·43 + (76-43) - 116.611 = 78.97.
	wantVar := (35.0/18)*(35.0/18)*43 + 33 - (76 + 17.0/18*43)
	near(t, "var N1", r.Orders[0].SE*r.Orders[0].SE, wantVar, 1e-9)
	// Hand computation of the first test statistic from its formula.
	a1, _ := JackknifeCoefficients(1, 18)
	a2, _ := JackknifeCoefficients(2, 18)
	d := r.Orders[1].N - r.Orders[0].N
	sb2 := 0.0
	for i := range f {
		b := a2[i] - a1[i]
		sb2 += b * b * float64(f[i])
	}
	z := d / math.Sqrt(76.0/75*(sb2-d*d/76))
	near(t, "z_1", r.Orders[0].Z, z, 1e-9)
	// The sequential rule on these statistics (z_1 = 4.05 and z_2 = 2.07
	// significant, z_3 = 1.07 not) selects order 3, whose closed form is
	// 158.48 (computed in the scipy script).
	if r.Selected != 3 {
		t.Errorf("selected order %d, want 3", r.Selected)
	}
	near(t, "selected N", r.N.Estimate, ind.JackknifeCottontail[2], 1e-8)
	checkN(t, r.Result, 76)
	// The true N = 135 (Edwards & Eberhardt 1967, enclosure population).
	// The selected jackknife should not be far off; this is a loose sanity
	// bound, not a published figure.
	if r.N.Estimate < 110 || r.N.Estimate > 180 {
		t.Errorf("cottontail jackknife %.1f implausible for N = 135", r.N.Estimate)
	}
	t.Logf("cottontail jackknife: selected order %d, interpolation %.3f, N = %.2f (SE %.2f), orders %+v", r.Selected, r.Interpolation, r.N.Estimate, r.N.SE, r.Orders)
}

func TestJackknifeBadInput(t *testing.T) {
	for _, c := range []struct {
		f    Frequencies
		want error
	}{
		{Frequencies{}, estimators.ErrNoData},
		{Frequencies{0, 0, 0}, estimators.ErrNoData},
		{Frequencies{5}, estimators.ErrTooFewOccasions},
		{Frequencies{5, -1, 0}, estimators.ErrInvalidInput},
		{Frequencies{7, 0, 0}, estimators.ErrNoRecaptures},
	} {
		if _, err := Jackknife(c.f); !errors.Is(err, c.want) {
			t.Errorf("%v: %v, want %v", c.f, err, c.want)
		}
	}
	// Every animal caught on every occasion: boundary, N = S.
	r, err := Jackknife(Frequencies{0, 0, 0, 9})
	if err != nil {
		t.Fatal(err)
	}
	if !r.Boundary || r.N.Estimate != 9 {
		t.Errorf("all caught every time: %+v", r.N)
	}
}

// Property: random frequency tables never give N below S, NaN or a panic.
func TestHeterogeneityEstimatorsNeverBelowCaught(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for trial := 0; trial < 400; trial++ {
		f := make(Frequencies, 2+rng.IntN(12))
		for i := range f {
			if rng.IntN(3) > 0 {
				f[i] = rng.IntN(40 / (i + 1))
			}
		}
		s := f.Animals()
		if s == 0 {
			continue
		}
		jk, err := Jackknife(f)
		if err == nil {
			checkN(t, jk.Result, s)
		} else if !errors.Is(err, estimators.ErrNoRecaptures) {
			t.Fatalf("%v: %v", f, err)
		}
		for _, est := range []func(Frequencies) (*estimators.Result, error){ChaoMh, ChaoMt} {
			r, err := est(f)
			if err != nil {
				if !errors.Is(err, estimators.ErrNoRecaptures) {
					t.Fatalf("%v: %v", f, err)
				}
				continue
			}
			checkN(t, r, s)
		}
	}
}
