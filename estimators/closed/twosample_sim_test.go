package closed

import (
	"math/rand/v2"
	"testing"
)

// TestChapmanCoverage simulates two-sample experiments on a closed
// population of known size with fixed seeds (first sample of M marked
// animals, second sample of each animal independently with probability p)
// and counts how often the automatic 95% interval covers N. A check of our
// own, not a published figure: the band 90-99% allows for the interval
// methods being approximate and for 600 runs (binomial SE about 0.9%).
func TestChapmanCoverage(t *testing.T) {
	for _, c := range []struct {
		n, m int
		p    float64
	}{
		{n: 400, m: 80, p: 0.2},    // R about 16: Poisson or binomial limits
		{n: 1500, m: 300, p: 0.25}, // R about 75: binomial limits
	} {
		rng := rand.New(rand.NewPCG(uint64(c.n), uint64(c.m)))
		covered, runs := 0, 600
		for i := 0; i < runs; i++ {
			var s TwoSample
			s.M = c.m
			for a := 0; a < c.n; a++ {
				if rng.Float64() < c.p {
					s.C++
					if a < c.m {
						s.R++
					}
				}
			}
			r, err := Chapman(s, TwoSampleCIAuto)
			if err != nil {
				t.Fatal(err)
			}
			if r.N.Low <= float64(c.n) && float64(c.n) <= r.N.High {
				covered++
			}
		}
		cov := float64(covered) / float64(runs)
		t.Logf("N=%d M=%d p=%.2f: coverage %.3f over %d runs", c.n, c.m, c.p, cov, runs)
		if cov < 0.90 || cov > 0.99 {
			t.Errorf("N=%d: coverage %.3f outside 0.90-0.99", c.n, cov)
		}
	}
}
