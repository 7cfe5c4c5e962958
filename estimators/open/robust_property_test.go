package open

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"tagtally/estimators"
)

// TestOpenEntryPointsRandomSmallStudies feeds small random capture matrices (random
// losses on capture, sparse and dense) to every entry point of gof.go,
// jsml.go, robust.go and robustml.go: each must return a result without
// NaN or an error wrapping one of the estimators sentinels, and never
// panic.
func TestOpenEntryPointsRandomSmallStudies(t *testing.T) {
	sentinels := []error{estimators.ErrNoData, estimators.ErrNoRecaptures, estimators.ErrTooFewOccasions, estimators.ErrInvalidInput, estimators.ErrNotConverged}
	known := func(err error) bool {
		for _, s := range sentinels {
			if errors.Is(err, s) {
				return true
			}
		}
		return false
	}
	badValue := func(v estimators.Value) bool {
		return math.IsNaN(v.Estimate) || math.IsNaN(v.SE) || math.IsNaN(v.Low) || math.IsNaN(v.High) || v.SE < 0
	}
	rng := rand.New(rand.NewPCG(77, 77))
	reps := 150
	if testing.Short() {
		reps = 40
	}
	for r := 0; r < reps; r++ {
		primaries := 3 + rng.IntN(2)
		secondaries := 2 + rng.IntN(2)
		k := primaries * secondaries
		primary := make([]int, k)
		for j := range primary {
			primary[j] = j / secondaries
		}
		animals := 1 + rng.IntN(25)
		density := 0.1 + 0.6*rng.Float64()
		h := &estimators.Histories{}
		for a := 0; a < animals; a++ {
			row := make([]bool, k)
			row[rng.IntN(k)] = true
			for j := range row {
				if rng.Float64() < density {
					row[j] = true
				}
			}
			h.Caught = append(h.Caught, row)
			h.Removed = append(h.Removed, rng.Float64() < 0.1)
		}
		if g, err := GoodnessOfFit(h); err != nil {
			if !known(err) {
				t.Errorf("rep %d: GoodnessOfFit: %v", r, err)
			}
		} else if math.IsNaN(g.CHat) || math.IsNaN(g.Overall.P) || math.IsNaN(g.Overall.ChiSquare) {
			t.Errorf("rep %d: GoodnessOfFit NaN", r)
		}
		for _, s := range []Structure{Constant, Time} {
			res, err := JollySeberML(h, s, s)
			if err != nil {
				if !known(err) {
					t.Errorf("rep %d: JollySeberML: %v", r, err)
				}
				continue
			}
			for _, p := range res.Result.Parameters {
				if badValue(p.Value) {
					t.Errorf("rep %d: JollySeberML %s: %+v", r, p.Name, p.Value)
				}
			}
		}
		if res, err := RobustDesignAdHoc(h, primary); err != nil {
			if !known(err) {
				t.Errorf("rep %d: RobustDesignAdHoc: %v", r, err)
			}
		} else {
			for _, rp := range res.Primaries {
				for _, v := range []*estimators.Value{rp.N, rp.PStar, rp.B, rp.TemporaryEmigration} {
					if v != nil && badValue(*v) {
						t.Errorf("rep %d: RobustDesignAdHoc primary %d: %+v", r, rp.Primary, *v)
					}
				}
			}
		}
		for _, model := range []RobustModel{{NoEmigration, false}, {RandomEmigration, false}, {RandomEmigration, true}} {
			res, err := RobustDesignML(h, primary, model)
			if err != nil {
				if !known(err) {
					t.Errorf("rep %d: RobustDesignML: %v", r, err)
				}
				continue
			}
			for _, p := range res.Result.Parameters {
				if badValue(p.Value) {
					t.Errorf("rep %d: RobustDesignML %s: %+v", r, p.Name, p.Value)
				}
			}
		}
	}
}
