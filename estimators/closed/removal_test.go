package closed

import (
	"errors"
	"math/rand/v2"
	"testing"

	"tagtally/estimators"
)

func TestRemovalAgainstScipy(t *testing.T) {
	ind := loadIndependent(t)
	for _, c := range ind.Removal {
		z, err := Zippin(c.Catches)
		if err != nil {
			t.Fatalf("%v: %v", c.Catches, err)
		}
		// scipy.optimize on the conditional likelihood.
		near(t, "Zippin N", z.N.Estimate, c.ZippinN, 1e-4*c.ZippinN)
		p, _ := z.Param("p")
		near(t, "Zippin p", p.Estimate, c.ZippinP, 1e-6)
		// Zippin's variance formula against the inverse expected
		// information computed numerically in the script.
		near(t, "Zippin var", z.N.SE*z.N.SE, c.ZippinVar, 1e-4*c.ZippinVar)
		near(t, "Zippin var p", p.SE*p.SE, c.ZippinVarP, 1e-4*c.ZippinVarP)
		cs, err := CarleStrub(c.Catches)
		if err != nil {
			t.Fatal(err)
		}
		// scipy: argmax over integer N of the Beta(1,1)-weighted likelihood.
		near(t, "Carle-Strub N", cs.N.Estimate, c.CarleStrubN, 0)
		total := 0
		for _, v := range c.Catches {
			total += v
		}
		checkN(t, z, total)
		checkN(t, cs, total)
	}
}

func TestRemovalHandFormula(t *testing.T) {
	// Two passes: Zippin reduces to the two-pass estimate N = c1²/(c1-c2)
	// (Seber 1982, ch. 7; common practice). Invented catches 60, 20:
	// N = 3600/40 = 90, p = 1 - 20/60.
	z, err := Zippin([]int{60, 20})
	if err != nil {
		t.Fatal(err)
	}
	near(t, "two-pass N", z.N.Estimate, 90, 1e-6)
	p, _ := z.Param("p")
	near(t, "two-pass p", p.Estimate, 2.0/3, 1e-8)
}

func TestRemovalBadInput(t *testing.T) {
	for _, f := range []func([]int) (*estimators.Result, error){Zippin, CarleStrub} {
		for _, c := range []struct {
			catches []int
			want    error
		}{
			{nil, estimators.ErrNoData},
			{[]int{5}, estimators.ErrTooFewOccasions},
			{[]int{5, -2, 1}, estimators.ErrInvalidInput},
			{[]int{0, 0, 0}, estimators.ErrNoData},
		} {
			if _, err := f(c.catches); !errors.Is(err, c.want) {
				t.Errorf("%v: %v, want %v", c.catches, err, c.want)
			}
		}
		// All on the first pass: boundary N = T.
		r, err := f([]int{14, 0, 0})
		if err != nil || !r.Boundary || r.N.Estimate != 14 {
			t.Errorf("all first pass: %v %+v", err, r)
		}
	}
	// Rising catches: Zippin has no estimate.
	if _, err := Zippin([]int{10, 12, 15}); !errors.Is(err, ErrNoDepletion) {
		t.Errorf("rising catches: %v", err)
	}
}

// Property: removal estimates are never below the total removed.
func TestRemovalNeverBelowCaught(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	for trial := 0; trial < 300; trial++ {
		k := 2 + rng.IntN(4)
		c := make([]int, k)
		total := 0
		for i := range c {
			c[i] = rng.IntN(50)
			total += c[i]
		}
		for _, f := range []func([]int) (*estimators.Result, error){Zippin, CarleStrub} {
			r, err := f(c)
			if err != nil {
				if !errors.Is(err, ErrNoDepletion) && !errors.Is(err, estimators.ErrNoData) {
					t.Fatalf("%v: %v", c, err)
				}
				continue
			}
			checkN(t, r, total)
		}
	}
}
