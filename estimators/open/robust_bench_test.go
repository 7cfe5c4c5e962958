package open

import (
	"math/rand/v2"
	"testing"
)

// Robust design with 5 primaries of 5 secondaries; the joint likelihood
// works from per-primary totals, so its cost after one pass over the
// histories barely depends on the number of animals (compare as ratios).
func BenchmarkRobustDesignML1k(b *testing.B)  { benchRobust(b, 400, true) }
func BenchmarkRobustDesignML10k(b *testing.B) { benchRobust(b, 4000, true) }
func BenchmarkRobustAdHoc1k(b *testing.B)     { benchRobust(b, 400, false) }
func BenchmarkRobustAdHoc10k(b *testing.B)    { benchRobust(b, 4000, false) }

func benchRobust(b *testing.B, initial int, ml bool) {
	rng := rand.New(rand.NewPCG(5, uint64(initial)))
	h, primary, _, _ := robustSimulate(rng, robustSim{primaries: 5, secondaries: 5, initial: initial, births: initial / 2, phi: 0.75, p: 0.3, gamma: 0.2})
	b.ResetTimer()
	for b.Loop() {
		var err error
		if ml {
			_, err = RobustDesignML(h, primary, RobustModel{Emigration: RandomEmigration})
		} else {
			_, err = RobustDesignAdHoc(h, primary)
		}
		if err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(h.Animals()), "animals")
}
