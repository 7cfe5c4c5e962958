package sync

import (
	"encoding/binary"
	"errors"
	"fmt"

	bolt "go.etcd.io/bbolt"

	"tagtally/capture"
)

// Buckets sync owns in the capture store's file (through capture.Tx.Bucket):
//
//	sync_revisions: record UUID(16) rev ID(16) -> stored revision (encodeRevision)
//	sync_records:   record UUID(16) -> study and leaves (encodeRecordState)
//	sync_feed:      seq (8, big-endian) -> feedEntry; seq from NextSequence
//	sync_meta:      name -> value: replica ID, epoch, peer checkpoints, sources
var (
	bucketRevisions = []byte("sync_revisions")
	bucketRecords   = []byte("sync_records")
	bucketFeed      = []byte("sync_feed")
	bucketMeta      = []byte("sync_meta")
)

// boltBackend runs transactions on the capture store.
type boltBackend struct{ s *capture.Store }

func (b boltBackend) update(fn func(txn) error) error {
	return b.s.Update(func(tx *capture.Tx) error {
		t, err := newBoltTxn(tx)
		if err != nil {
			return err
		}
		return fn(t)
	})
}

// batch uses the store's Batch (bbolt's db.Batch: concurrent pushes share
// one commit) when the store offers it, else Update.
func (b boltBackend) batch(fn func(txn) error) error {
	bs, ok := any(b.s).(interface {
		Batch(func(tx *capture.Tx) error) error
	})
	if !ok {
		return b.update(fn)
	}
	return bs.Batch(func(tx *capture.Tx) error {
		t, err := newBoltTxn(tx)
		if err != nil {
			return err
		}
		return fn(t)
	})
}

func (b boltBackend) view(fn func(txn) error) error {
	return b.s.View(func(tx *capture.Tx) error {
		t, err := newBoltTxn(tx)
		if err != nil {
			return err
		}
		return fn(t)
	})
}

func (b boltBackend) studyIDs() ([]string, error) {
	sts, err := b.s.ListStudies()
	ids := make([]string, len(sts))
	for i, st := range sts {
		ids[i] = st.ID
	}
	return ids, err
}

type boltTxn struct {
	tx                   *capture.Tx
	revs, recs, feed, mt *bolt.Bucket // nil in a read-only tx before the first write
	studies              map[string]bool
}

func newBoltTxn(tx *capture.Tx) (*boltTxn, error) {
	t := &boltTxn{tx: tx}
	for _, x := range []struct {
		b    **bolt.Bucket
		name []byte
	}{{&t.revs, bucketRevisions}, {&t.recs, bucketRecords}, {&t.feed, bucketFeed}, {&t.mt, bucketMeta}} {
		b, err := tx.Bucket(x.name)
		if errors.Is(err, capture.ErrNotFound) && !tx.Writable() {
			continue // empty store: reads find nothing
		}
		if err != nil {
			return nil, fmt.Errorf("sync: %w", err)
		}
		if tx.Writable() {
			// Keys are mostly appended (UUID v7 records, sequential feed).
			b.FillPercent = 0.9
		}
		*x.b = b
	}
	return t, nil
}

func (t *boltTxn) prepare(c *capture.Capture) (capture.Findings, error) { return t.tx.Prepare(c) }

func (t *boltTxn) studyExists(id string) (bool, error) {
	if ok, seen := t.studies[id]; seen {
		return ok, nil
	}
	_, err := t.tx.GetStudy(id)
	if err != nil && !errors.Is(err, capture.ErrNotFound) {
		return false, err
	}
	if t.studies == nil {
		t.studies = make(map[string]bool)
	}
	t.studies[id] = err == nil
	return err == nil, nil
}

func (t *boltTxn) record(captureID string) (recordState, bool, error) {
	if t.recs == nil {
		return recordState{}, false, nil
	}
	k, err := recordKey(captureID)
	if err != nil {
		return recordState{}, false, nil
	}
	v := t.recs.Get(k)
	if v == nil {
		return recordState{}, false, nil
	}
	rs, err := decodeRecordState(v)
	if err != nil {
		return rs, false, fmt.Errorf("record %s: %w", captureID, err)
	}
	return rs, true, nil
}

func (t *boltTxn) putRecord(captureID string, rs recordState) error {
	k, err := recordKey(captureID)
	if err != nil {
		return err
	}
	return t.recs.Put(k, encodeRecordState(rs))
}

func (t *boltTxn) revision(captureID, revID string) ([]byte, bool, error) {
	if t.revs == nil {
		return nil, false, nil
	}
	k, err := revisionKey(captureID, revID)
	if err != nil {
		return nil, false, nil
	}
	v := t.revs.Get(k)
	return v, v != nil, nil
}

func (t *boltTxn) putRevision(captureID, revID string, val []byte) error {
	k, err := revisionKey(captureID, revID)
	if err != nil {
		return err
	}
	return t.revs.Put(k, val)
}

func (t *boltTxn) forEachRevision(captureID string, fn func(val []byte) error) error {
	if t.revs == nil {
		return nil
	}
	k, err := recordKey(captureID)
	if err != nil {
		return nil
	}
	c := t.revs.Cursor()
	for key, v := c.Seek(k); key != nil && len(key) == 32 && string(key[:16]) == string(k); key, v = c.Next() {
		if err := fn(v); err != nil {
			return err
		}
	}
	return nil
}

func (t *boltTxn) current(studyID, captureID string) (*capture.Capture, error) {
	return t.tx.GetCapture(studyID, captureID)
}

func (t *boltTxn) putCurrent(c *capture.Capture) error { return t.tx.PutCaptureRaw(c) }

func (t *boltTxn) forEachCapture(studyID string, fn func(c *capture.Capture) error) error {
	return t.tx.ForEachCapture(studyID, fn)
}

func (t *boltTxn) appendFeed(e feedEntry) (uint64, error) {
	seq, err := t.feed.NextSequence()
	if err != nil {
		return 0, err
	}
	return seq, t.feed.Put(binary.BigEndian.AppendUint64(nil, seq), encodeFeedEntry(e))
}

func (t *boltTxn) feedAfter(after uint64, fn func(seq uint64, e feedEntry) (bool, error)) error {
	if t.feed == nil {
		return nil
	}
	c := t.feed.Cursor()
	for k, v := c.Seek(binary.BigEndian.AppendUint64(nil, after+1)); k != nil; k, v = c.Next() {
		if len(k) != 8 {
			return fmt.Errorf("feed key %x: %w", k, errCorrupt)
		}
		e, err := decodeFeedEntry(v)
		if err != nil {
			return fmt.Errorf("feed entry %d: %w", binary.BigEndian.Uint64(k), err)
		}
		more, err := fn(binary.BigEndian.Uint64(k), e)
		if err != nil || !more {
			return err
		}
	}
	return nil
}

func (t *boltTxn) lastSeq() (uint64, error) {
	if t.feed == nil {
		return 0, nil
	}
	return t.feed.Sequence(), nil
}

func (t *boltTxn) getMeta(key string) ([]byte, error) {
	if t.mt == nil {
		return nil, nil
	}
	v := t.mt.Get([]byte(key))
	if v == nil {
		return nil, nil
	}
	return append([]byte(nil), v...), nil
}

func (t *boltTxn) putMeta(key string, v []byte) error { return t.mt.Put([]byte(key), v) }
