package open

import (
	"math/rand/v2"
	"testing"

	"tagtally/estimators"
)

// gofBenchHistories simulates about `animals` capture histories over 20
// occasions (phi 0.8, p 0.4, equal entries per occasion).
func gofBenchHistories(animals int) *estimators.Histories {
	rng := rand.New(rand.NewPCG(42, uint64(animals)))
	// About 1 - 0.6·… of the entrants are ever caught; scale entries so the
	// number of histories is close to the target.
	per := animals * 10 / (20 * 7)
	h, _ := gofSimulate(rng, gofSim{k: 20, entries: constInts(20, per), phi: constSlice(19, 0.8), p: constSlice(20, 0.4)})
	return h
}

// The component tests read every history once per occasion: cost grows
// with animals × occasions (compare the 1k and 100k runs as a ratio).
func BenchmarkGoodnessOfFit1k(b *testing.B)   { benchGOF(b, 1000) }
func BenchmarkGoodnessOfFit100k(b *testing.B) { benchGOF(b, 100000) }

func benchGOF(b *testing.B, n int) {
	h := gofBenchHistories(n)
	b.ResetTimer()
	for b.Loop() {
		if _, err := GoodnessOfFit(h); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(h.Animals()), "animals")
}
