package capture

import bolt "go.etcd.io/bbolt"

// Batch runs fn in a read-write transaction shared with other concurrent
// Batch calls (bbolt's DB.Batch): one commit, one fsync, for several
// requests. fn may run more than once (when another function in the same
// batch fails, each is retried alone), so it must be idempotent and must
// not report results before Batch returns. Added for sync, whose push
// handler calls it once per pushed batch (PERFORMANCE.md).
func (s *Store) Batch(fn func(tx *Tx) error) error {
	return s.db.Batch(func(btx *bolt.Tx) error {
		return fn(newTx(btx))
	})
}
