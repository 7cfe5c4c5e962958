package open

import "testing"

// After one pass over the histories the Jolly-Seber likelihood depends only
// on per-occasion totals, so the fit costs about the same for 1k and 100k
// animals (compare the two as a ratio; the pass itself grows linearly).
func BenchmarkJollySeberMLTime1k(b *testing.B)   { benchJSML(b, 1000, Time) }
func BenchmarkJollySeberMLTime100k(b *testing.B) { benchJSML(b, 100000, Time) }
func BenchmarkJollySeberMLConst1k(b *testing.B)  { benchJSML(b, 1000, Constant) }
func BenchmarkJollySeberMLConst100k(b *testing.B) {
	benchJSML(b, 100000, Constant)
}

func benchJSML(b *testing.B, n int, s Structure) {
	h := gofBenchHistories(n)
	b.ResetTimer()
	for b.Loop() {
		if _, err := JollySeberML(h, s, s); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(h.Animals()), "animals")
}
