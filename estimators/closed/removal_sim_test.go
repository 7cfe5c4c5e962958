package closed

import (
	"math/rand/v2"
	"testing"

	"tagtally/estimators"
)

// TestRemovalCoverage simulates depletion sampling of a closed population
// of known size (each remaining animal caught with probability p on each of
// k passes) with a fixed seed and reports how often the 95% intervals of
// Zippin and Carle-Strub cover N. A check of our own: the band 0.88-0.99
// allows for the normal approximation and 500 runs.
func TestRemovalCoverage(t *testing.T) {
	const n, k, p, runs = 300, 4, 0.4, 500
	rng := rand.New(rand.NewPCG(11, 12))
	hits := map[string]int{}
	failed := 0
	for i := 0; i < runs; i++ {
		left := n
		catches := make([]int, k)
		for j := range catches {
			for a := 0; a < left; a++ {
				if rng.Float64() < p {
					catches[j]++
				}
			}
			left -= catches[j]
		}
		for name, f := range map[string]func([]int) (*estimators.Result, error){"Zippin": Zippin, "Carle-Strub": CarleStrub} {
			r, err := f(catches)
			if err != nil {
				failed++
				continue
			}
			if r.N.Low <= n && n <= r.N.High {
				hits[name]++
			}
		}
	}
	for name, h := range hits {
		cov := float64(h) / runs
		t.Logf("%s: coverage %.3f over %d runs (N=%d, k=%d, p=%.1f)", name, cov, runs, n, k, p)
		if cov < 0.88 || cov > 0.99 {
			t.Errorf("%s coverage %.3f outside 0.88-0.99", name, cov)
		}
	}
	if failed > 0 {
		t.Errorf("%d fits failed", failed)
	}
}
