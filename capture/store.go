package capture

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/google/uuid"
	bolt "go.etcd.io/bbolt"
)

// Errors of the store. Methods wrap them with a prefix naming the thing
// concerned; test with errors.Is.
var (
	// ErrNotFound: no study or capture with that ID. A lookup that finds
	// nothing returns this, never a nil record with a nil error.
	ErrNotFound = errors.New("not found")
	// ErrConflict: the write contradicts what is stored (creating a study
	// or capture whose ID exists, editing a deleted capture).
	ErrConflict = errors.New("conflict")
	// ErrNewerSchema: the file was written by a newer tagtally whose schema
	// this binary does not know.
	ErrNewerSchema = errors.New("data file has a newer schema than this program")
	// ErrReservedBucket: Tx.Bucket was asked for one of the store's own
	// buckets.
	ErrReservedBucket = errors.New("bucket is reserved for the capture store")
)

// Bucket names. The store owns these four; other packages get their own
// through Tx.Bucket.
var (
	bucketStudies  = []byte("studies")
	bucketCaptures = []byte("captures")
	bucketTags     = []byte("tag_index")
	bucketMeta     = []byte("meta")
)

var keySchema = []byte("schema_version")

// fillPercent for the append-mostly buckets: capture keys are UUID v7
// (time-ordered), so most inserts go to the right-hand page and a fuller
// split wastes less space (PERFORMANCE.md: 276k/s and a 64 MB file instead
// of 191k/s and 114 MB for 100k records).
const fillPercent = 0.9

// List limits.
const (
	DefaultListLimit = 100
	MaxListLimit     = 5000
)

// Options configure Open. A nil *Options means DefaultOptions.
type Options struct {
	// Timeout is how long Open waits for the file lock held by another
	// process before giving up. 0 waits for ever.
	Timeout time.Duration
	// ReadOnly opens the file shared and read-only (no migrations run; the
	// schema must be current).
	ReadOnly bool
	// FileMode is the permission of a newly created data file.
	FileMode os.FileMode
}

// DefaultOptions: wait one second for the lock, read-write, file readable
// by its owner only (capture locations of protected species are sensitive).
var DefaultOptions = &Options{Timeout: time.Second, FileMode: 0o600}

// Store keeps studies and capture records in one bbolt file.
//
// Layout (bucket: key -> value):
//
//	studies:   studyID -> Study JSON
//	captures:  studyID 0x00 UUID(16 bytes) -> Capture JSON
//	tag_index: studyID 0x00 tag 0x00 UUID(16 bytes) -> tagRef (12 bytes)
//	meta:      "schema_version" -> uint64 big-endian
//
// Invariants, kept by every write (CreateCapture, UpdateCapture,
// DeleteCapture, PutCaptures, Tx.PutCaptureRaw) in the same transaction:
//   - a capture's key is its StudyID and its ID; the ID is a UUID, stored
//     in canonical lower-case form;
//   - the tag index has exactly one entry per (capture, TagID) and one per
//     (capture, OldTagID) for retags, deleted captures included, whose
//     value mirrors the capture's time, event, fate and deleted flag;
//   - IDs and tags contain no 0x00 byte (validation rejects control
//     characters), so the separators are unambiguous.
type Store struct {
	db   *bolt.DB
	path string
}

// migrations bring a data file up to date. The schema version stored in the
// meta bucket is the number of migrations applied; Open applies the rest in
// order, each in its own transaction with the version bump. Append only:
// never edit or reorder a published migration.
var migrations = []func(tx *bolt.Tx) error{
	// 1: the four buckets.
	func(tx *bolt.Tx) error {
		for _, name := range [][]byte{bucketStudies, bucketCaptures, bucketTags} {
			if _, err := tx.CreateBucketIfNotExists(name); err != nil {
				return err
			}
		}
		return nil
	},
}

// SchemaVersion is the schema this binary writes: len(migrations).
func SchemaVersion() int { return len(migrations) }

// Open opens (creating if needed) the data file at path and brings its
// schema up to date.
func Open(path string, opts *Options) (*Store, error) {
	if opts == nil {
		opts = DefaultOptions
	}
	mode := opts.FileMode
	if mode == 0 {
		mode = 0o600
	}
	db, err := bolt.Open(path, mode, &bolt.Options{Timeout: opts.Timeout, ReadOnly: opts.ReadOnly})
	if err != nil {
		return nil, fmt.Errorf("capture store: open %s: %w", path, err)
	}
	s := &Store{db: db, path: path}
	if err := s.migrate(opts.ReadOnly); err != nil {
		db.Close()
		return nil, fmt.Errorf("capture store: %s: %w", path, err)
	}
	return s, nil
}

func (s *Store) migrate(readOnly bool) error {
	var have uint64
	err := s.db.View(func(tx *bolt.Tx) error {
		if b := tx.Bucket(bucketMeta); b != nil {
			if v := b.Get(keySchema); len(v) == 8 {
				have = be64(v)
			}
		}
		return nil
	})
	if err != nil {
		return err
	}
	if have > uint64(len(migrations)) {
		return fmt.Errorf("%w (schema %d, this program knows %d)", ErrNewerSchema, have, len(migrations))
	}
	if readOnly {
		if have < uint64(len(migrations)) {
			return fmt.Errorf("schema %d needs migrating to %d, which a read-only open cannot do", have, len(migrations))
		}
		return nil
	}
	for v := have; v < uint64(len(migrations)); v++ {
		err := s.db.Update(func(tx *bolt.Tx) error {
			if err := migrations[v](tx); err != nil {
				return err
			}
			meta, err := tx.CreateBucketIfNotExists(bucketMeta)
			if err != nil {
				return err
			}
			return meta.Put(keySchema, put64(v+1))
		})
		if err != nil {
			return fmt.Errorf("schema migration %d: %w", v+1, err)
		}
	}
	return nil
}

// Close closes the data file.
func (s *Store) Close() error { return s.db.Close() }

// Path returns the data file's path.
func (s *Store) Path() string { return s.path }

// Check runs bbolt's consistency check over the whole file and the store's
// own invariants (every tag-index entry points at a capture that names the
// tag; every capture is indexed). It returns the first problem found.
func (s *Store) Check() error {
	return s.db.View(func(tx *bolt.Tx) error {
		// Drain the channel: bbolt's checker goroutine blocks on every
		// error until it is read.
		var first error
		for err := range tx.Check() {
			if first == nil {
				first = fmt.Errorf("capture store: bbolt check: %w", err)
			}
		}
		if first != nil {
			return first
		}
		if err := checkIndex(tx); err != nil {
			return fmt.Errorf("capture store: %w", err)
		}
		return nil
	})
}

// ---- studies ----

// CreateStudy stores a new study. ErrConflict if the ID exists; a
// *ValidationError if the study is invalid.
func (s *Store) CreateStudy(st *Study) error {
	return s.putStudy(st, true)
}

// PutStudy stores a study, creating or replacing it. Replacing a study
// whose occasion windows changed does not rewrite stored captures;
// capture histories derive occasions afresh from the current windows (see
// BuildHistories), and a capture's stored Occasion is refreshed when it is
// next written.
func (s *Store) PutStudy(st *Study) error {
	return s.putStudy(st, false)
}

func (s *Store) putStudy(st *Study, create bool) error {
	if err := st.Validate(); err != nil {
		return fmt.Errorf("study: %w", err)
	}
	buf, err := json.Marshal(st)
	if err != nil {
		return fmt.Errorf("study %q: %w", st.ID, err)
	}
	return s.db.Update(func(tx *bolt.Tx) error {
		b := tx.Bucket(bucketStudies)
		if create && b.Get([]byte(st.ID)) != nil {
			return fmt.Errorf("study %q: %w: it already exists", st.ID, ErrConflict)
		}
		return b.Put([]byte(st.ID), buf)
	})
}

// GetStudy returns a copy of the study; ErrNotFound if there is none.
func (s *Store) GetStudy(id string) (*Study, error) {
	var st *Study
	err := s.db.View(func(tx *bolt.Tx) error {
		var err error
		st, err = getStudy(tx, id)
		return err
	})
	return st, err
}

// ListStudies returns every study, ordered by ID (an empty, non-nil slice
// when there is none).
func (s *Store) ListStudies() ([]Study, error) {
	out := []Study{} // never nil: encodes as [] in JSON
	err := s.db.View(func(tx *bolt.Tx) error {
		return tx.Bucket(bucketStudies).ForEach(func(k, v []byte) error {
			var st Study
			if err := json.Unmarshal(v, &st); err != nil {
				return fmt.Errorf("study %q: stored record unreadable: %w", k, err)
			}
			out = append(out, st)
			return nil
		})
	})
	return out, err
}

func getStudy(tx *bolt.Tx, id string) (*Study, error) {
	v := tx.Bucket(bucketStudies).Get([]byte(id))
	if v == nil {
		return nil, fmt.Errorf("study %q: %w", id, ErrNotFound)
	}
	st := new(Study)
	if err := json.Unmarshal(v, st); err != nil {
		return nil, fmt.Errorf("study %q: stored record unreadable: %w", id, err)
	}
	return st, nil
}

// ---- captures ----

// CreateCapture validates and stores a new capture. It assigns a UUID v7
// when c.ID is empty, normalises the ID, derives the occasion from
// captured_at unless it was set by hand, writes the tag index, and returns
// the stored record with its soft findings. c itself is not modified.
// Errors: ErrNotFound (no such study), ErrConflict (the ID exists), a
// *ValidationError (ErrInvalid).
func (s *Store) CreateCapture(c *Capture) (*Capture, Findings, error) {
	rec := cloneCapture(c)
	var fs Findings
	err := s.Update(func(tx *Tx) error {
		if rec.ID == "" {
			id, err := uuid.NewV7()
			if err != nil {
				return fmt.Errorf("capture: new ID: %w", err)
			}
			rec.ID = id.String()
		}
		var err error
		if fs, err = tx.Prepare(rec); err != nil {
			return err
		}
		if tx.exists(rec.StudyID, rec.ID) {
			return fmt.Errorf("capture %s: %w: a record with this ID exists", rec.ID, ErrConflict)
		}
		return tx.PutCaptureRaw(rec)
	})
	if err != nil {
		return nil, nil, err
	}
	return rec, fs, nil
}

// UpdateCapture replaces the body of an existing, live capture with c
// (matched by StudyID and ID) after validating it, and returns the stored
// record with its findings. The stored Revision is kept as it is: versions
// belong to sync, which writes through Tx.PutCaptureRaw. Errors:
// ErrNotFound, ErrConflict (the capture is deleted), *ValidationError.
func (s *Store) UpdateCapture(c *Capture) (*Capture, Findings, error) {
	rec := cloneCapture(c)
	var fs Findings
	err := s.Update(func(tx *Tx) error {
		if rec.ID == "" {
			return invalid("id", "the capture ID is missing")
		}
		var err error
		if fs, err = tx.Prepare(rec); err != nil {
			return err
		}
		old, err := tx.GetCapture(rec.StudyID, rec.ID)
		if err != nil {
			return err
		}
		if old.Revision.Deleted {
			return fmt.Errorf("capture %s: %w: it is deleted", rec.ID, ErrConflict)
		}
		rec.Revision = old.Revision
		return tx.PutCaptureRaw(rec)
	})
	if err != nil {
		return nil, nil, err
	}
	return rec, fs, nil
}

// DeleteCapture marks a capture deleted (Revision.Deleted). The record and
// its index entries stay, so a delete can be reviewed and undone, and sync
// can pass the tombstone on. Deleting a deleted capture does nothing.
func (s *Store) DeleteCapture(studyID, id string) error {
	return s.Update(func(tx *Tx) error {
		c, err := tx.GetCapture(studyID, id)
		if err != nil {
			return err
		}
		if c.Revision.Deleted {
			return nil
		}
		c.Revision.Deleted = true
		return tx.PutCaptureRaw(c)
	})
}

// GetCapture returns a copy of one capture (deleted ones included: check
// Revision.Deleted); ErrNotFound if there is none.
func (s *Store) GetCapture(studyID, id string) (*Capture, error) {
	var c *Capture
	err := s.View(func(tx *Tx) error {
		var err error
		c, err = tx.GetCapture(studyID, id)
		return err
	})
	return c, err
}

// PutCaptures stores a batch of captures in one transaction: for each it
// assigns a UUID v7 when ID is empty (writing it back into batch[i].ID),
// derives the occasion, validates and writes, replacing a live record with
// the same ID. The batch is all or nothing: the first invalid record aborts
// it with an error naming its position. Findings are returned per record,
// in batch order. Use batches of about 500 to 5,000 records
// (PERFORMANCE.md).
func (s *Store) PutCaptures(batch []Capture) ([]Findings, error) {
	out := make([]Findings, len(batch))
	ids := make([]string, len(batch))
	err := s.Update(func(tx *Tx) error {
		for i := range batch {
			rec := cloneCapture(&batch[i])
			if rec.ID == "" {
				id, err := uuid.NewV7()
				if err != nil {
					return fmt.Errorf("capture: new ID: %w", err)
				}
				rec.ID = id.String()
			}
			fs, err := tx.Prepare(rec)
			if err != nil {
				return fmt.Errorf("record %d of the batch: %w", i+1, err)
			}
			if tx.exists(rec.StudyID, rec.ID) {
				old, err := tx.GetCapture(rec.StudyID, rec.ID)
				if err != nil {
					return fmt.Errorf("record %d of the batch: %w", i+1, err)
				}
				if old.Revision.Deleted {
					return fmt.Errorf("record %d of the batch: capture %s: %w: it is deleted", i+1, rec.ID, ErrConflict)
				}
				rec.Revision = old.Revision
			}
			if err := tx.PutCaptureRaw(rec); err != nil {
				return fmt.Errorf("record %d of the batch: %w", i+1, err)
			}
			out[i] = fs
			ids[i] = rec.ID
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	// Only after the commit: tell the caller the IDs as stored.
	for i := range batch {
		batch[i].ID = ids[i]
	}
	return out, nil
}

// Filter selects captures for ListCaptures. Zero fields do not filter.
type Filter struct {
	Occasion  int
	StationID string
	// TagID matches a capture's tag or, for a retag, its old tag.
	TagID string
	// Species matches case-insensitively.
	Species        string
	IncludeDeleted bool
	// After is the cursor returned with the previous page: the ID of the
	// last capture on it.
	After string
	// Limit is the page size: DefaultListLimit when 0, at most MaxListLimit.
	Limit int
}

// ListCaptures returns one page of a study's captures in key order (UUID
// v7 IDs are time-ordered, so roughly the order they were created) and the
// cursor for the next page, "" after the last. The page is never nil.
// ErrNotFound if the study does not exist; a cursor that is not a capture
// ID is a *ValidationError on field "after".
func (s *Store) ListCaptures(studyID string, f Filter) ([]Capture, string, error) {
	limit := f.Limit
	if limit <= 0 {
		limit = DefaultListLimit
	}
	if limit > MaxListLimit {
		limit = MaxListLimit
	}
	var after []byte
	if f.After != "" {
		u, err := uuid.Parse(f.After)
		if err != nil {
			return nil, "", invalid("after", "the page cursor %q is not a capture ID", f.After)
		}
		after = u[:]
	}
	page := []Capture{} // never nil: encodes as [] in JSON
	next := ""
	err := s.db.View(func(btx *bolt.Tx) error {
		if _, err := getStudy(btx, studyID); err != nil {
			return err
		}
		match := func(c *Capture) bool {
			return (f.IncludeDeleted || !c.Revision.Deleted) &&
				(f.Occasion == 0 || c.Occasion == f.Occasion) &&
				(f.StationID == "" || c.StationID == f.StationID) &&
				(f.Species == "" || strings.EqualFold(c.Species, f.Species)) &&
				(f.TagID == "" || c.TagID == f.TagID || c.OldTagID == f.TagID)
		}
		// visit returns false to stop.
		visit := func(v []byte) (bool, error) {
			var c Capture
			if err := json.Unmarshal(v, &c); err != nil {
				return false, fmt.Errorf("stored capture unreadable: %w", err)
			}
			if !match(&c) {
				return true, nil
			}
			if len(page) == limit {
				next = page[len(page)-1].ID
				return false, nil
			}
			page = append(page, c)
			return true, nil
		}
		caps := btx.Bucket(bucketCaptures)
		if f.TagID != "" {
			// Walk the tag index, then fetch each capture.
			prefix := tagPrefix(studyID, f.TagID)
			cur := btx.Bucket(bucketTags).Cursor()
			k, _ := cur.Seek(prefix)
			if after != nil {
				k, _ = cur.Seek(append(append([]byte{}, prefix...), after...))
				if k != nil && len(k) == len(prefix)+16 && bytes.Equal(k[len(prefix):], after) {
					k, _ = cur.Next()
				}
			}
			for ; k != nil && bytes.HasPrefix(k, prefix) && len(k) == len(prefix)+16; k, _ = cur.Next() {
				v := caps.Get(captureKeyRaw(studyID, k[len(prefix):]))
				if v == nil {
					return fmt.Errorf("tag index names capture %x, which is missing", k[len(prefix):])
				}
				more, err := visit(v)
				if err != nil || !more {
					return err
				}
			}
			return nil
		}
		prefix := studyPrefix(studyID)
		cur := caps.Cursor()
		k, v := cur.Seek(prefix)
		if after != nil {
			k, v = cur.Seek(captureKeyRaw(studyID, after))
			if k != nil && bytes.Equal(k, captureKeyRaw(studyID, after)) {
				k, v = cur.Next()
			}
		}
		for ; k != nil && bytes.HasPrefix(k, prefix); k, v = cur.Next() {
			more, err := visit(v)
			if err != nil || !more {
				return err
			}
		}
		return nil
	})
	if err != nil {
		return nil, "", fmt.Errorf("captures of study %q: %w", studyID, err)
	}
	return page, next, nil
}

// Captures returns every capture of a study in key order, deleted ones
// only when includeDeleted is true. For exports and histories; the HTTP
// API pages with ListCaptures.
func (s *Store) Captures(studyID string, includeDeleted bool) ([]Capture, error) {
	var out []Capture
	err := s.View(func(tx *Tx) error {
		if _, err := tx.GetStudy(studyID); err != nil {
			return err
		}
		return tx.ForEachCapture(studyID, func(c *Capture) error {
			if includeDeleted || !c.Revision.Deleted {
				out = append(out, *c)
			}
			return nil
		})
	})
	return out, err
}

// ---- backup ----

// Backup writes a consistent copy of the whole data file to w while the
// store stays open for reads and writes (a read transaction's Tx.WriteTo).
// It returns the number of bytes written.
func (s *Store) Backup(w io.Writer) (int64, error) {
	var n int64
	err := s.db.View(func(tx *bolt.Tx) error {
		var err error
		n, err = tx.WriteTo(w)
		return err
	})
	if err != nil {
		return n, fmt.Errorf("capture store: backup: %w", err)
	}
	return n, nil
}

// BackupToFile writes a backup to path atomically: into a temporary file
// in the same directory, synced to disk, then renamed over path. A crash
// leaves either the old file or the complete new one, never half a backup.
func (s *Store) BackupToFile(path string) error {
	dir := filepath.Dir(path)
	tmp, err := os.CreateTemp(dir, "."+filepath.Base(path)+".tmp-*")
	if err != nil {
		return fmt.Errorf("capture store: backup: %w", err)
	}
	ok := false
	defer func() {
		if !ok {
			tmp.Close()
			os.Remove(tmp.Name())
		}
	}()
	if _, err := s.Backup(tmp); err != nil {
		return err
	}
	if err := tmp.Sync(); err != nil {
		return fmt.Errorf("capture store: backup: %w", err)
	}
	if err := tmp.Close(); err != nil {
		return fmt.Errorf("capture store: backup: %w", err)
	}
	if err := os.Rename(tmp.Name(), path); err != nil {
		return fmt.Errorf("capture store: backup: %w", err)
	}
	ok = true
	if d, err := os.Open(dir); err == nil {
		// Make the rename itself durable; not all systems allow syncing a
		// directory, and the backup is complete either way.
		_ = d.Sync()
		d.Close()
	}
	return nil
}

// ---- keys and encoding ----

func studyPrefix(studyID string) []byte {
	k := make([]byte, 0, len(studyID)+1)
	k = append(k, studyID...)
	return append(k, 0)
}

func captureKeyRaw(studyID string, id []byte) []byte {
	k := make([]byte, 0, len(studyID)+1+16)
	k = append(k, studyID...)
	k = append(k, 0)
	return append(k, id...)
}

func tagPrefix(studyID, tag string) []byte {
	k := make([]byte, 0, len(studyID)+len(tag)+2+16)
	k = append(k, studyID...)
	k = append(k, 0)
	k = append(k, tag...)
	return append(k, 0)
}

func normaliseID(id string) string {
	u, err := uuid.Parse(id)
	if err != nil {
		return id
	}
	return u.String()
}

func be64(b []byte) uint64 {
	_ = b[7]
	return uint64(b[0])<<56 | uint64(b[1])<<48 | uint64(b[2])<<40 | uint64(b[3])<<32 |
		uint64(b[4])<<24 | uint64(b[5])<<16 | uint64(b[6])<<8 | uint64(b[7])
}

func put64(v uint64) []byte {
	return []byte{byte(v >> 56), byte(v >> 48), byte(v >> 40), byte(v >> 32), byte(v >> 24), byte(v >> 16), byte(v >> 8), byte(v)}
}

// cloneCapture copies a capture deeply enough that the copy shares no
// slices or pointers with the original.
func cloneCapture(c *Capture) *Capture {
	if c == nil {
		return &Capture{}
	}
	out := *c
	out.MassG = clonef(c.MassG)
	out.Lat = clonef(c.Lat)
	out.Lon = clonef(c.Lon)
	out.AccuracyM = clonef(c.AccuracyM)
	if c.Measurements != nil {
		out.Measurements = append([]Measurement(nil), c.Measurements...)
	}
	if c.Revision.Parents != nil {
		out.Revision.Parents = append([]string(nil), c.Revision.Parents...)
	}
	return &out
}

func clonef(p *float64) *float64 {
	if p == nil {
		return nil
	}
	v := *p
	return &v
}
