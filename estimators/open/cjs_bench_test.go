package open

import (
	"fmt"
	"math/rand/v2"
	"testing"

	"tagtally/estimators"
)

// benchHistories makes n animals over t occasions: each first caught on
// an occasion before the last, then surviving each interval with
// probability 0.7 and caught with probability 0.5 while alive.
func benchHistories(n, t int) *estimators.Histories {
	rng := rand.New(rand.NewPCG(uint64(n), uint64(t)))
	h := &estimators.Histories{Caught: make([][]bool, n)}
	for a := range h.Caught {
		row := make([]bool, t)
		first := a % (t - 1)
		row[first] = true
		for j := first + 1; j < t; j++ {
			if rng.Float64() >= 0.7 {
				break
			}
			row[j] = rng.Float64() < 0.5
		}
		h.Caught[a] = row
	}
	return h
}

// BenchmarkCJS fits phi(.) p(.) and phi(t) p(t) to 1,000 and 100,000
// animals over 20 occasions, with the m-array built from the histories
// inside the timed loop ("histories") and outside it ("m-array"). The
// m-array fits should take the same time for both sizes.
func BenchmarkCJS(b *testing.B) {
	for _, n := range []int{1000, 100000} {
		h := benchHistories(n, 20)
		m, _, err := FromHistories(h)
		if err != nil {
			b.Fatal(err)
		}
		for _, spec := range []ModelSpec{{Constant, Constant}, {Time, Time}} {
			name := fmt.Sprintf("phi(%s)p(%s)/animals=%d", spec.Phi, spec.P, n)
			b.Run(name+"/m-array", func(b *testing.B) {
				for b.Loop() {
					if _, err := CJS(m, spec.Phi, spec.P); err != nil {
						b.Fatal(err)
					}
				}
			})
			b.Run(name+"/histories", func(b *testing.B) {
				for b.Loop() {
					m, _, err := FromHistories(h)
					if err != nil {
						b.Fatal(err)
					}
					if _, err := CJS(m, spec.Phi, spec.P); err != nil {
						b.Fatal(err)
					}
				}
			})
		}
	}
}
