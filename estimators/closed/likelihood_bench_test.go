package closed

import (
	"math/rand/v2"
	"testing"

	"tagtally/estimators"
)

// benchHistories is a population of 12,000 animals over 15 occasions with
// heterogeneous, time-varying, mass-dependent catchability, of which about
// 10,000 are caught; mass is an individual covariate.
func benchHistories() *estimators.Histories {
	rng := rand.New(rand.NewPCG(2026, 15))
	const n, t = 12500, 15
	mass := make([]float64, n)
	for i := range mass {
		mass[i] = 180 + 40*rng.NormFloat64()
	}
	occ := []float64{-0.3, 0.1, 0, -0.2, 0.2, 0.1, -0.1, 0, 0.3, -0.2, 0.1, 0, -0.1, 0.2, 0}
	return simulate(rng, n, t, func(i, j int, _ bool) float64 {
		return estimators.Expit(-2.1 + 0.01*(mass[i]-180) + occ[j])
	}, map[string]func(int) float64{"mass": func(i int) float64 { return mass[i] }})
}

// BenchmarkM0 is one M0 fit (with its profile interval) on the benchmark
// population, the unit for the ratio reported with BenchmarkModelSet.
func BenchmarkM0(b *testing.B) {
	h := benchHistories()
	for b.Loop() {
		if _, err := M0(h); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(h.Animals()), "animals")
}

// BenchmarkModelSet fits every likelihood model of this package (M0, Mt,
// Mb, Mh, Mth, Mtb and Huggins with one covariate) on the same population.
func BenchmarkModelSet(b *testing.B) {
	h := benchHistories()
	for b.Loop() {
		for _, f := range []func(*estimators.Histories) (*estimators.Result, error){M0, Mt, Mb, Mh, Mth, Mtb} {
			if _, err := f(h); err != nil {
				b.Fatal(err)
			}
		}
		if _, err := Huggins(h, []string{"mass"}, false); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(h.Animals()), "animals")
}

// Per-model benchmarks, to see where the time goes.
func BenchmarkMt(b *testing.B)  { benchOne(b, Mt) }
func BenchmarkMb(b *testing.B)  { benchOne(b, Mb) }
func BenchmarkMh(b *testing.B)  { benchOne(b, Mh) }
func BenchmarkMth(b *testing.B) { benchOne(b, Mth) }
func BenchmarkMtb(b *testing.B) { benchOne(b, Mtb) }
func BenchmarkHuggins(b *testing.B) {
	benchOne(b, func(h *estimators.Histories) (*estimators.Result, error) { return Huggins(h, []string{"mass"}, false) })
}

func benchOne(b *testing.B, f func(*estimators.Histories) (*estimators.Result, error)) {
	h := benchHistories()
	b.ResetTimer()
	for b.Loop() {
		if _, err := f(h); err != nil {
			b.Fatal(err)
		}
	}
}
