package capture_test

import (
	"errors"
	"path/filepath"
	"testing"

	bolt "go.etcd.io/bbolt"

	"tagtally/capture"
	"tagtally/capture/storetest"
)

func TestTxSameTransaction(t *testing.T) {
	s := openWithStudy(t)
	feed := []byte("test_feed")
	c := newCapture("BF-0001", capture.EventNewMark, 1)
	c.ID = "0190b8a0-0000-7000-8000-0000000000aa"
	c.Revision = capture.Revision{ID: "r1", Depth: 1, Stamp: "s1"}

	// A failing function rolls back both the capture and the caller's bucket.
	boom := errors.New("boom")
	err := s.Update(func(tx *capture.Tx) error {
		if err := tx.PutCaptureRaw(c); err != nil {
			return err
		}
		b, err := tx.Bucket(feed)
		if err != nil {
			return err
		}
		if err := b.Put([]byte{1}, []byte(c.ID)); err != nil {
			return err
		}
		return boom
	})
	if !errors.Is(err, boom) {
		t.Fatalf("Update returned %v", err)
	}
	if _, err := s.GetCapture(c.StudyID, c.ID); !errors.Is(err, capture.ErrNotFound) {
		t.Errorf("rolled-back capture is stored: %v", err)
	}
	err = s.View(func(tx *capture.Tx) error {
		_, err := tx.Bucket(feed)
		return err
	})
	if !errors.Is(err, capture.ErrNotFound) {
		t.Errorf("rolled-back bucket exists: %v", err)
	}

	// Committed: both, with the revision kept exactly.
	err = s.Update(func(tx *capture.Tx) error {
		if err := tx.PutCaptureRaw(c); err != nil {
			return err
		}
		b, err := tx.Bucket(feed)
		if err != nil {
			return err
		}
		return b.Put([]byte{1}, []byte(c.ID))
	})
	if err != nil {
		t.Fatal(err)
	}
	got, err := s.GetCapture(c.StudyID, c.ID)
	if err != nil || got.Revision.ID != "r1" || got.Revision.Stamp != "s1" || got.Occasion != 0 {
		t.Errorf("raw put: %+v, %v (want revision r1 and occasion untouched)", got, err)
	}
	// A raw put that changes the tag moves the index entry (Check runs at cleanup).
	c.TagID = "BF-0002"
	c.Revision.Deleted = true
	if err := s.Update(func(tx *capture.Tx) error { return tx.PutCaptureRaw(c) }); err != nil {
		t.Fatal(err)
	}
	page, _, _ := s.ListCaptures(c.StudyID, capture.Filter{TagID: "BF-0002", IncludeDeleted: true})
	if len(page) != 1 {
		t.Errorf("index not moved to the new tag")
	}
	if err := s.Check(); err != nil {
		t.Error(err)
	}
}

func TestTxRefusals(t *testing.T) {
	s := openWithStudy(t)
	err := s.Update(func(tx *capture.Tx) error {
		for _, name := range []string{"studies", "captures", "tag_index", "meta"} {
			if _, err := tx.Bucket([]byte(name)); !errors.Is(err, capture.ErrReservedBucket) {
				t.Errorf("bucket %s handed out: %v", name, err)
			}
		}
		bad := newCapture("BF-0001", capture.EventNewMark, 1)
		bad.ID = "0190B8A0-0000-7000-8000-0000000000AA" // not canonical
		if err := tx.PutCaptureRaw(bad); !errors.Is(err, capture.ErrInvalid) {
			t.Errorf("non-canonical ID accepted: %v", err)
		}
		bad.ID = "0190b8a0-0000-7000-8000-0000000000aa"
		bad.TagID = "a\x00b"
		if err := tx.PutCaptureRaw(bad); !errors.Is(err, capture.ErrInvalid) {
			t.Errorf("NUL in tag accepted: %v", err)
		}
		// Prepare normalises, derives and checks, without writing.
		ok := newCapture("BF-0001", capture.EventRecapture, 3)
		ok.ID = "0190B8A0-0000-7000-8000-0000000000AB"
		fs, err := tx.Prepare(ok)
		if err != nil || ok.ID != "0190b8a0-0000-7000-8000-0000000000ab" || ok.Occasion != 3 || !fs.Has(capture.FindingNeverMarked) {
			t.Errorf("Prepare: %+v %+v %v", ok, fs, err)
		}
		if _, err := tx.GetCapture(ok.StudyID, ok.ID); !errors.Is(err, capture.ErrNotFound) {
			t.Errorf("Prepare wrote the record")
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
}

func TestSchemaVersion(t *testing.T) {
	path := filepath.Join(t.TempDir(), "x.db")
	s, err := capture.Open(path, nil)
	if err != nil {
		t.Fatal(err)
	}
	s.Close()
	// Reopening applies nothing and keeps the data.
	s, err = capture.Open(path, nil)
	if err != nil {
		t.Fatal(err)
	}
	s.Close()
	// A file from a newer program is refused rather than misread.
	db, err := bolt.Open(path, 0o600, nil)
	if err != nil {
		t.Fatal(err)
	}
	err = db.Update(func(tx *bolt.Tx) error {
		v := uint64(capture.SchemaVersion() + 1)
		return tx.Bucket([]byte("meta")).Put([]byte("schema_version"), []byte{0, 0, 0, 0, 0, 0, 0, byte(v)})
	})
	db.Close()
	if err != nil {
		t.Fatal(err)
	}
	if _, err := capture.Open(path, nil); !errors.Is(err, capture.ErrNewerSchema) {
		t.Errorf("newer schema: got %v", err)
	}
}

func TestStoretestOpenChecks(t *testing.T) {
	// storetest.Open must hand out a working, empty store.
	s := storetest.Open(t)
	if list, err := s.ListStudies(); err != nil || len(list) != 0 {
		t.Errorf("fresh store: %v %v", list, err)
	}
}

// TestCheckFindsStaleIndex makes sure the cleanup check can fail: a
// capture written behind the store's back has no tag-index entry.
func TestCheckFindsStaleIndex(t *testing.T) {
	path := filepath.Join(t.TempDir(), "x.db")
	s, err := capture.Open(path, nil)
	if err != nil {
		t.Fatal(err)
	}
	if err := s.CreateStudy(storetest.Study()); err != nil {
		t.Fatal(err)
	}
	if _, _, err := s.CreateCapture(newCapture("BF-0001", capture.EventNewMark, 1)); err != nil {
		t.Fatal(err)
	}
	if err := s.Check(); err != nil {
		t.Fatalf("clean store: %v", err)
	}
	s.Close()
	db, err := bolt.Open(path, 0o600, nil)
	if err != nil {
		t.Fatal(err)
	}
	err = db.Update(func(tx *bolt.Tx) error {
		b := tx.Bucket([]byte("tag_index"))
		k, _ := b.Cursor().First()
		return b.Delete(append([]byte(nil), k...))
	})
	db.Close()
	if err != nil {
		t.Fatal(err)
	}
	s, err = capture.Open(path, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	if err := s.Check(); err == nil {
		t.Errorf("Check missed a capture without its tag-index entry")
	}
}

// TestBatchConcurrent: concurrent Batch calls each commit their record,
// and a failing one does not take the others down.
func TestBatchConcurrent(t *testing.T) {
	s := openWithStudy(t)
	const n = 8
	errs := make(chan error, n)
	for i := 0; i < n; i++ {
		go func(i int) {
			errs <- s.Batch(func(tx *capture.Tx) error {
				if i == 3 {
					return errors.New("refused")
				}
				c := newCapture("BF-0001", capture.EventRecapture, 1)
				c.ID = uuidFor(100 + i)
				return tx.PutCaptureRaw(c)
			})
		}(i)
	}
	failed := 0
	for i := 0; i < n; i++ {
		if err := <-errs; err != nil {
			failed++
		}
	}
	all, err := s.Captures("fen-grid-2025", true)
	if err != nil || failed != 1 || len(all) != n-1 {
		t.Errorf("%d failed, %d stored (%v); want 1 and %d", failed, len(all), err, n-1)
	}
}
