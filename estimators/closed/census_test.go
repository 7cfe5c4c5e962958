package closed

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"tagtally/estimators"
)

func censusFrom(c, r []float64) Census {
	var cs Census
	for i := range c {
		cs.Caught = append(cs.Caught, int(c[i]))
		cs.Recaptured = append(cs.Recaptured, int(r[i]))
	}
	return cs
}

func TestCensusAgainstScipy(t *testing.T) {
	ind := loadIndependent(t)
	for _, c := range ind.Census {
		cs := censusFrom(c.Caught, c.Recaptured)
		s1, err := Schnabel(cs, true)
		if err != nil {
			t.Fatal(err)
		}
		near(t, "Schnabel +1", s1.N.Estimate, c.SchnabelPlus1, 1e-9)
		near(t, "Schnabel +1 low", s1.N.Low, c.Plus1Limits[0], 1e-6)
		near(t, "Schnabel +1 high", s1.N.High, c.Plus1Limits[1], 1e-6)
		// Both invented series have more than 50 recaptures.
		if wantKind := "normal on 1/N, inverted"; s1.N.Kind != wantKind {
			t.Errorf("kind %q, want %q", s1.N.Kind, wantKind)
		}
		s0, err := Schnabel(cs, false)
		if err != nil {
			t.Fatal(err)
		}
		near(t, "Schnabel", s0.N.Estimate, c.Schnabel, 1e-9)
		se, err := SchumacherEschmeyer(cs)
		if err != nil {
			t.Fatal(err)
		}
		// scipy/numpy: weighted least squares through the origin.
		near(t, "Schumacher-Eschmeyer", se.N.Estimate, c.SEN, 1e-6)
		near(t, "S-E low", se.N.Low, c.SELimits[0], 1e-4)
		near(t, "S-E high", se.N.High, c.SELimits[1], 1e-4)
	}
}

func TestCensusHandFormula(t *testing.T) {
	// Invented 4-occasion series. M_t = 0, 10, 18, 26.
	cs := Census{Caught: []int{10, 10, 10, 10}, Recaptured: []int{0, 2, 2, 4}}
	m := cs.MarkedAtLarge()
	if m[1] != 10 || m[2] != 18 || m[3] != 26 {
		t.Fatalf("M_t = %v", m)
	}
	r, err := Schnabel(cs, true)
	if err != nil {
		t.Fatal(err)
	}
	// Hand formula: Σ C M = 540, Σ R = 8 -> 540/9 = 60.
	near(t, "Schnabel +1", r.N.Estimate, 60, 1e-12)
	// Hand formula: SE = N² sqrt(ΣR)/ΣCM = 3600·sqrt(8)/540.
	near(t, "Schnabel SE", r.N.SE, 3600*math.Sqrt(8)/540, 1e-9)
	// Fewer than 50 recaptures: Poisson limits on Σ R put through the +1 form.
	lo, hi := PoissonMeanInterval(8)
	if r.N.Kind != estimators.CIPoisson {
		t.Errorf("kind %q", r.N.Kind)
	}
	near(t, "Schnabel Poisson low", r.N.Low, 540/(hi+1), 1e-9)
	near(t, "Schnabel Poisson high", r.N.High, 540/(lo+1), 1e-9)
	s, err := SchumacherEschmeyer(cs)
	if err != nil {
		t.Fatal(err)
	}
	// Hand formula: Σ C M² = 10·(100+324+676) = 11000, Σ R M = 20+36+104 = 160.
	near(t, "S-E", s.N.Estimate, 11000.0/160, 1e-9)
}

func TestCensusFromHistoriesWithLosses(t *testing.T) {
	h := &estimators.Histories{
		Caught: [][]bool{
			{true, true, false},  // recaptured at 2
			{true, false, true},  // recaptured at 3, removed there
			{false, true, false}, // new at 2, removed at first capture
			{false, true, true},  // new at 2, recaptured at 3
			{true, false, false},
		},
		Removed: []bool{false, true, true, false, false},
	}
	c, err := CensusFromHistories(h)
	if err != nil {
		t.Fatal(err)
	}
	want := Census{Caught: []int{3, 3, 2}, Recaptured: []int{0, 1, 2}, NewMarks: []int{3, 1, 0}, LostMarked: []int{0, 0, 1}}
	for j := range want.Caught {
		if c.Caught[j] != want.Caught[j] || c.Recaptured[j] != want.Recaptured[j] || c.NewMarks[j] != want.NewMarks[j] || c.LostMarked[j] != want.LostMarked[j] {
			t.Fatalf("got %+v, want %+v", c, want)
		}
	}
	if m := c.MarkedAtLarge(); m[1] != 3 || m[2] != 4 {
		t.Errorf("M_t = %v, want [0 3 4]", m)
	}
}

func TestCensusBadInput(t *testing.T) {
	for _, c := range []struct {
		name string
		cs   Census
		want error
	}{
		{"empty", Census{}, estimators.ErrNoData},
		{"negative", Census{Caught: []int{5, -1}, Recaptured: []int{0, 0}}, estimators.ErrInvalidInput},
		{"recaptured before marking", Census{Caught: []int{5, 5}, Recaptured: []int{1, 0}}, estimators.ErrInvalidInput},
		{"no recaptures", Census{Caught: []int{5, 5, 5}, Recaptured: []int{0, 0, 0}}, estimators.ErrNoRecaptures},
		{"single occasion", Census{Caught: []int{5}, Recaptured: []int{0}}, estimators.ErrTooFewOccasions},
		{"lengths", Census{Caught: []int{5, 5}, Recaptured: []int{0}}, estimators.ErrInvalidInput},
	} {
		if _, err := Schnabel(c.cs, true); !errors.Is(err, c.want) {
			t.Errorf("%s: Schnabel err %v, want %v", c.name, err, c.want)
		}
	}
	if _, err := SchumacherEschmeyer(Census{Caught: []int{5, 5}, Recaptured: []int{0, 2}}); !errors.Is(err, estimators.ErrTooFewOccasions) {
		t.Errorf("S-E with 2 occasions: %v", err)
	}
}

// Property: on random consistent series the estimates are finite and never
// below the number of animals caught.
func TestCensusNeverBelowCaught(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for trial := 0; trial < 500; trial++ {
		occ := 3 + rng.IntN(6)
		var cs Census
		marked := 0
		for j := 0; j < occ; j++ {
			c := rng.IntN(30)
			r := 0
			if marked > 0 {
				r = rng.IntN(min(c, marked) + 1)
			}
			cs.Caught = append(cs.Caught, c)
			cs.Recaptured = append(cs.Recaptured, r)
			marked += c - r
		}
		caught := 0
		for j := range cs.Caught {
			caught += cs.Caught[j] - cs.Recaptured[j]
		}
		for _, f := range []func(Census) (*estimators.Result, error){
			func(c Census) (*estimators.Result, error) { return Schnabel(c, true) },
			func(c Census) (*estimators.Result, error) { return Schnabel(c, false) },
			SchumacherEschmeyer,
		} {
			r, err := f(cs)
			if err != nil {
				if !errors.Is(err, estimators.ErrNoRecaptures) && !errors.Is(err, estimators.ErrTooFewOccasions) && !errors.Is(err, estimators.ErrNoData) {
					t.Fatalf("%+v: unexpected error %v", cs, err)
				}
				continue
			}
			checkN(t, r, caught)
		}
	}
}
