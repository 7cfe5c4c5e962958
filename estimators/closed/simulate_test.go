package closed

import (
	"errors"
	"flag"
	"math"
	"math/rand/v2"
	"testing"

	"tagtally/estimators"
)

// longSimulation runs the coverage simulations with more replicates.
var longSimulation = flag.Bool("long", false, "run the long coverage simulations")

// simulate draws a closed population of n animals over t occasions. p gives
// animal i's capture probability on occasion j, knowing whether it was
// caught before; z gives its covariates. Only animals caught at least once
// are returned, as in the field.
func simulate(rng *rand.Rand, n, t int, p func(i, j int, caughtBefore bool) float64, z map[string]func(i int) float64) *estimators.Histories {
	h := &estimators.Histories{}
	if z != nil {
		h.Covariates = map[string][]float64{}
	}
	for i := 0; i < n; i++ {
		row := make([]bool, t)
		seen := false
		for j := 0; j < t; j++ {
			if rng.Float64() < p(i, j, seen) {
				row[j] = true
				seen = true
			}
		}
		if !seen {
			continue
		}
		h.Caught = append(h.Caught, row)
		for name, f := range z {
			h.Covariates[name] = append(h.Covariates[name], f(i))
		}
	}
	return h
}

// coverage fits fit to reps populations drawn by draw and returns the share
// of 95% intervals that contain trueN, with the number of fits that failed
// (skipped: no recaptures, or a likelihood unbounded in N).
func coverage(t *testing.T, reps int, trueN float64, draw func(rng *rand.Rand) *estimators.Histories, fit func(*estimators.Histories) (*estimators.Result, error), seed uint64) (share float64, failed int, meanN float64) {
	t.Helper()
	rng := rand.New(rand.NewPCG(seed, 2718))
	covered, ok := 0, 0
	for r := 0; r < reps; r++ {
		h := draw(rng)
		res, err := fit(h)
		if err != nil {
			if errors.Is(err, estimators.ErrNoRecaptures) || errors.Is(err, estimators.ErrNotConverged) {
				failed++
				continue
			}
			t.Fatalf("replicate %d: %v", r, err)
		}
		if math.IsNaN(res.N.Estimate) || math.IsNaN(res.N.Low) || math.IsNaN(res.N.High) {
			t.Fatalf("replicate %d: NaN in %+v", r, res.N)
		}
		if res.N.Low < float64(h.Animals())-1e-9 {
			t.Fatalf("replicate %d: lower bound %.3f below Mt1 = %d", r, res.N.Low, h.Animals())
		}
		ok++
		meanN += res.N.Estimate
		if res.N.Low <= trueN && trueN <= res.N.High {
			covered++
		}
	}
	if ok == 0 {
		t.Fatal("no replicate could be fitted")
	}
	return float64(covered) / float64(ok), failed, meanN / float64(ok)
}

// TestCoverageM0 checks that the profile-likelihood interval of M0 covers
// the true N in close to 95% of populations simulated under M0 (the
// nominal level; the acceptance band 92-98% allows for Monte Carlo error,
// about ±1.9% at 500 replicates, and the interval's small-sample
// behaviour).
func TestCoverageM0(t *testing.T) {
	reps := 600
	if *longSimulation {
		reps = 5000
	}
	const n, occ = 80, 5
	draw := func(rng *rand.Rand) *estimators.Histories {
		return simulate(rng, n, occ, func(int, int, bool) float64 { return 0.2 }, nil)
	}
	share, failed, meanN := coverage(t, reps, n, draw, M0, 11)
	t.Logf("M0 under M0 (N=%d, t=%d, p=0.2): coverage %.3f over %d fits (%d failed), mean N̂ %.1f", n, occ, share, reps-failed, failed, meanN)
	if share < 0.92 || share > 0.98 {
		t.Errorf("M0 profile interval coverage %.3f, want 0.92-0.98", share)
	}
}

// TestCoverageMh reports (without asserting a band) how often the Mh
// two-point mixture's profile interval covers N when catchability truly
// varies between animals; coverage under heterogeneity is known to be
// below nominal (e.g. Pledger 2000 discusses the bias of Mh estimators).
// It asserts only that most populations can be fitted and that coverage is
// not absurdly low.
func TestCoverageMh(t *testing.T) {
	reps := 500
	if *longSimulation {
		reps = 2000
	}
	const n, occ = 100, 6
	// Two classes: 40% with p = 0.15, 60% with p = 0.45.
	draw := func(rng *rand.Rand) *estimators.Histories {
		return simulate(rng, n, occ, func(i, _ int, _ bool) float64 {
			if i < 40 {
				return 0.15
			}
			return 0.45
		}, nil)
	}
	share, failed, meanN := coverage(t, reps, n, draw, Mh, 13)
	t.Logf("Mh under a two-class mixture (N=%d, t=%d, 40%% p=0.15, 60%% p=0.45): coverage %.3f over %d fits (%d could not be fitted: N unbounded), mean N̂ %.1f", n, occ, share, reps-failed, failed, meanN)
	if share < 0.5 {
		t.Errorf("Mh coverage %.3f is far below anything plausible", share)
	}
	if failed > reps/4 {
		t.Errorf("%d of %d Mh fits failed", failed, reps)
	}

	// Continuous heterogeneity, which the two-point mixture only
	// approximates: each animal's p is drawn from a logit-normal
	// distribution (logit p ~ Normal(−1.2, 1)), median p about 0.23.
	drawCont := func(rng *rand.Rand) *estimators.Histories {
		p := make([]float64, n)
		for i := range p {
			p[i] = estimators.Expit(-1.2 + rng.NormFloat64())
		}
		return simulate(rng, n, occ, func(i, _ int, _ bool) float64 { return p[i] }, nil)
	}
	share, failed, meanN = coverage(t, reps, n, drawCont, Mh, 17)
	t.Logf("Mh under logit-normal heterogeneity (N=%d, t=%d, logit p ~ N(-1.2, 1)): coverage %.3f over %d fits (%d could not be fitted: N unbounded), mean N̂ %.1f", n, occ, share, reps-failed, failed, meanN)
	if share < 0.5 {
		t.Errorf("Mh coverage %.3f is far below anything plausible", share)
	}
}
