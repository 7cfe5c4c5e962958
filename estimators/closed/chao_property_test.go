package closed

import (
	"errors"
	"math/rand/v2"
	"testing"

	"tagtally/estimators"
)

// Property: on random capture histories (with losses on capture) the
// history-based estimators give finite estimates never below the number of
// animals caught, or one of the documented errors; never a panic.
func TestHistoryEstimatorsNeverBelowCaught(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 8))
	for trial := 0; trial < 300; trial++ {
		animals, occ := 1+rng.IntN(40), 1+rng.IntN(9)
		p := 0.05 + 0.6*rng.Float64()
		h := &estimators.Histories{}
		for i := 0; i < animals; i++ {
			row := make([]bool, occ)
			any := false
			for j := range row {
				row[j] = rng.Float64() < p
				any = any || row[j]
			}
			if !any {
				row[rng.IntN(occ)] = true
			}
			h.Caught = append(h.Caught, row)
			h.Removed = append(h.Removed, rng.IntN(10) == 0)
		}
		ok := func(err error) bool {
			return errors.Is(err, estimators.ErrNoRecaptures) || errors.Is(err, estimators.ErrTooFewOccasions)
		}
		if r, err := ChaoMth(h); err == nil {
			checkN(t, r, animals)
		} else if !ok(err) {
			t.Fatalf("ChaoMth: %v", err)
		}
		c, err := CensusFromHistories(h)
		if err != nil {
			t.Fatal(err)
		}
		if err := c.Validate(); err != nil {
			t.Fatalf("census from histories is inconsistent: %v (%+v)", err, c)
		}
		for _, f := range []func(Census) (*estimators.Result, error){SchumacherEschmeyer, func(c Census) (*estimators.Result, error) { return Schnabel(c, true) }} {
			if r, err := f(c); err == nil {
				checkN(t, r, animals)
			} else if !ok(err) {
				t.Fatalf("census estimator: %v", err)
			}
		}
		rep, err := Table(h, TableOptions{Models: []string{"jackknife", "chao-mh", "chao-mt", "chao-mth", "schnabel", "schumacher-eschmeyer", "chapman"}})
		if err != nil {
			t.Fatal(err)
		}
		for _, r := range rep.Rows {
			if r.Result != nil {
				checkN(t, r.Result, animals)
			}
		}
	}
}
