package sync

import (
	"runtime"
	stdsync "sync"
)

// minPerWorker is the least work (revisions) worth a goroutine: below it
// the hand-off costs more than the decoding or hashing it spreads.
const minPerWorker = 64

// parallel calls fn(i) for every i in [0, n), spread in contiguous chunks
// over at most GOMAXPROCS goroutines (see parallelChunks).
func parallel(n int, fn func(i int)) {
	parallelChunks(n, func(lo, hi int) {
		for i := lo; i < hi; i++ {
			fn(i)
		}
	})
}

// parallelChunks splits [0, n) into at most GOMAXPROCS contiguous chunks
// of at least minPerWorker, calls fn(lo, hi) for each, one goroutine per
// chunk, and returns when all have returned; with one chunk it calls fn in
// this goroutine. fn must be safe to call concurrently for different
// chunks. Decoding and checking a pushed batch is pure CPU work per
// revision (JSON, the canonical body, SHA-256) done before the write
// transaction, so a push can use a second core for it while bbolt's single
// writer cannot; on a busy machine it costs nothing extra.
func parallelChunks(n int, fn func(lo, hi int)) {
	w := min(runtime.GOMAXPROCS(0), n/minPerWorker)
	if w <= 1 {
		fn(0, n)
		return
	}
	var wg stdsync.WaitGroup
	chunk := (n + w - 1) / w
	for lo := 0; lo < n; lo += chunk {
		hi := min(lo+chunk, n)
		wg.Add(1)
		go func() {
			defer wg.Done()
			fn(lo, hi)
		}()
	}
	wg.Wait()
}
