package capture

import (
	"bytes"
	"encoding/json"
	"fmt"
	"time"

	"github.com/google/uuid"
	bolt "go.etcd.io/bbolt"
)

// Tx is one store transaction, handed to the function given to
// Store.Update or Store.View. It exists so that a package built on the
// store (sync) can write capture records together with its own data
// (revisions, change feed, checkpoints) in the SAME bbolt transaction:
// either all of it commits or none.
//
// Rules for callers:
//   - A Tx is valid only inside the function it was given to; do not keep
//     it, its buckets, or any []byte read from a bucket after that function
//     returns (bbolt reuses the memory). Copy what you need.
//   - Do no network or other slow I/O inside Update: bbolt allows one
//     writer at a time.
//   - Write capture records only through PutCaptureRaw, which keeps the tag
//     index consistent with the records. Never write the store's own
//     buckets (studies, captures, tag_index, meta) directly; Bucket refuses
//     to hand them out.
//   - Buffers passed to a bucket's Put must stay untouched until the
//     transaction ends.
type Tx struct {
	tx    *bolt.Tx
	caps  *bolt.Bucket
	tags  *bolt.Bucket
	rules map[string]*rules
}

// Update runs fn in a read-write transaction, committed when fn returns nil
// and rolled back when it returns an error (which Update returns).
func (s *Store) Update(fn func(tx *Tx) error) error {
	return s.db.Update(func(btx *bolt.Tx) error {
		return fn(newTx(btx))
	})
}

// Batch runs fn in a read-write transaction that bbolt may share with
// other concurrent Batch calls (DB.Batch): one commit and one fsync for
// several requests. fn may run more than once (when another function in the
// same batch fails, each is retried alone), so it must be idempotent and
// must not report results before Batch returns. Call it once per request
// (a whole pushed batch), never once per record: with a single caller it
// only adds bbolt's batch delay (PERFORMANCE.md).
func (s *Store) Batch(fn func(tx *Tx) error) error {
	return s.db.Batch(func(btx *bolt.Tx) error {
		return fn(newTx(btx))
	})
}

// View runs fn in a read-only transaction. Any number of View calls run
// concurrently with each other and with one Update.
func (s *Store) View(fn func(tx *Tx) error) error {
	return s.db.View(func(btx *bolt.Tx) error {
		return fn(newTx(btx))
	})
}

func newTx(btx *bolt.Tx) *Tx {
	t := &Tx{tx: btx, caps: btx.Bucket(bucketCaptures), tags: btx.Bucket(bucketTags)}
	if btx.Writable() {
		// Only the captures bucket: its keys are time-ordered. Tag-index
		// keys arrive in tag order, effectively at random, where bbolt's
		// default split point wastes less (measured: BenchmarkPutCaptures).
		t.caps.FillPercent = fillPercent
	}
	return t
}

// Writable reports whether this is an Update transaction.
func (t *Tx) Writable() bool { return t.tx.Writable() }

// Bucket returns the caller-owned top-level bucket with this name, creating
// it in a writable transaction if it does not exist. In a read-only
// transaction a missing bucket is ErrNotFound. The store's own bucket names
// are refused with ErrReservedBucket. The bucket is valid only inside the
// transaction.
func (t *Tx) Bucket(name []byte) (*bolt.Bucket, error) {
	for _, own := range [][]byte{bucketStudies, bucketCaptures, bucketTags, bucketMeta} {
		if bytes.Equal(name, own) {
			return nil, fmt.Errorf("bucket %q: %w", name, ErrReservedBucket)
		}
	}
	if len(name) == 0 {
		return nil, fmt.Errorf("bucket name is empty: %w", ErrInvalid)
	}
	if !t.tx.Writable() {
		b := t.tx.Bucket(name)
		if b == nil {
			return nil, fmt.Errorf("bucket %q: %w", name, ErrNotFound)
		}
		return b, nil
	}
	b, err := t.tx.CreateBucketIfNotExists(name)
	if err != nil {
		return nil, fmt.Errorf("bucket %q: %w", name, err)
	}
	return b, nil
}

// GetStudy returns a copy of a study; ErrNotFound if there is none.
func (t *Tx) GetStudy(id string) (*Study, error) { return getStudy(t.tx, id) }

// GetCapture returns a copy of a capture, deleted or not; ErrNotFound if
// there is none (or id is not a UUID).
func (t *Tx) GetCapture(studyID, id string) (*Capture, error) {
	u, err := uuid.Parse(id)
	if err != nil {
		return nil, fmt.Errorf("capture %q: %w", id, ErrNotFound)
	}
	v := t.caps.Get(captureKeyRaw(studyID, u[:]))
	if v == nil {
		return nil, fmt.Errorf("capture %s in study %q: %w", u, studyID, ErrNotFound)
	}
	c := new(Capture)
	if err := json.Unmarshal(v, c); err != nil {
		return nil, fmt.Errorf("capture %s: stored record unreadable: %w", u, err)
	}
	return c, nil
}

// exists reports whether a capture with this study and canonical ID is
// stored, without decoding it.
func (t *Tx) exists(studyID, id string) bool {
	u, err := uuid.Parse(id)
	return err == nil && t.caps.Get(captureKeyRaw(studyID, u[:])) != nil
}

// ForEachCapture calls fn with each capture of a study (deleted ones
// included) in key order. The *Capture is a fresh copy that fn may keep.
// An error from fn stops the walk and is returned.
func (t *Tx) ForEachCapture(studyID string, fn func(c *Capture) error) error {
	prefix := studyPrefix(studyID)
	cur := t.caps.Cursor()
	for k, v := cur.Seek(prefix); k != nil && bytes.HasPrefix(k, prefix); k, v = cur.Next() {
		c := new(Capture)
		if err := json.Unmarshal(v, c); err != nil {
			return fmt.Errorf("capture %x: stored record unreadable: %w", k[len(prefix):], err)
		}
		if err := fn(c); err != nil {
			return err
		}
	}
	return nil
}

// Prepare readies a capture for writing and checks it, without writing:
// it normalises c.ID to canonical UUID form (it does not assign one),
// derives c.Occasion unless set by hand, validates c against its study
// (ValidateCapture) and adds the findings that need the other records of
// the study (FindingNeverMarked, FindingAlreadyMarked, FindingAfterLoss),
// taken from the tag index as it stands in this transaction. It modifies
// c. Errors: ErrNotFound (no such study), *ValidationError.
//
// Sync calls Prepare and then PutCaptureRaw for a record it accepts.
func (t *Tx) Prepare(c *Capture) (Findings, error) {
	if c == nil {
		return nil, invalid("", "no capture given")
	}
	if c.ID != "" {
		u, err := uuid.Parse(c.ID)
		if err != nil {
			return nil, invalid("id", "capture ID %q is not a UUID", c.ID)
		}
		c.ID = u.String()
	}
	r, err := t.studyRules(c.StudyID)
	if err != nil {
		return nil, err
	}
	fs := DeriveOccasion(r.st, c)
	more, err := r.check(c)
	if err != nil {
		return nil, err
	}
	fs = append(fs, more...)
	if !c.Revision.Deleted {
		fs = append(fs, t.indexFindings(c)...)
	}
	return fs, nil
}

func (t *Tx) studyRules(studyID string) (*rules, error) {
	if r, ok := t.rules[studyID]; ok {
		return r, nil
	}
	if studyID == "" {
		return nil, invalid("study_id", "the study ID is missing")
	}
	st, err := getStudy(t.tx, studyID)
	if err != nil {
		return nil, err
	}
	r, err := compileRules(st)
	if err != nil {
		return nil, fmt.Errorf("study %q as stored: %w", studyID, err)
	}
	if t.rules == nil {
		t.rules = make(map[string]*rules)
	}
	t.rules[studyID] = r
	return r, nil
}

// PutCaptureRaw stores c exactly as given (creating or replacing the record
// with its StudyID and ID) and brings the tag index in line: the entries of
// the previous version, if any, are removed and the new ones written. It
// does not validate, assign IDs, derive occasions or touch Revision: the
// caller decides the version. It refuses only what would break the key
// layout: an ID that is not a canonical lower-case UUID, or a study ID or
// tag that is empty or contains a 0x00 byte (ErrInvalid). It needs a
// writable transaction.
func (t *Tx) PutCaptureRaw(c *Capture) error {
	u, err := uuid.Parse(c.ID)
	if err != nil || u.String() != c.ID {
		return invalid("id", "capture ID %q is not a canonical lower-case UUID", c.ID)
	}
	if c.StudyID == "" || bytes.IndexByte([]byte(c.StudyID), 0) >= 0 {
		return invalid("study_id", "study ID %q is empty or contains a 0x00 byte", c.StudyID)
	}
	if c.TagID == "" || bytes.IndexByte([]byte(c.TagID), 0) >= 0 || bytes.IndexByte([]byte(c.OldTagID), 0) >= 0 {
		return invalid("tag_id", "tag ID is empty or contains a 0x00 byte")
	}
	key := captureKeyRaw(c.StudyID, u[:])
	if old := t.caps.Get(key); old != nil {
		var prev Capture
		if err := json.Unmarshal(old, &prev); err != nil {
			return fmt.Errorf("capture %s: stored record unreadable: %w", c.ID, err)
		}
		for _, tag := range indexedTags(&prev) {
			if err := t.tags.Delete(append(tagPrefix(prev.StudyID, tag.tag), u[:]...)); err != nil {
				return err
			}
		}
	}
	buf, err := json.Marshal(c)
	if err != nil {
		return fmt.Errorf("capture %s: %w", c.ID, err)
	}
	if err := t.caps.Put(key, buf); err != nil {
		return fmt.Errorf("capture %s: %w", c.ID, err)
	}
	for _, tag := range indexedTags(c) {
		if err := t.tags.Put(append(tagPrefix(c.StudyID, tag.tag), u[:]...), encodeRef(c, tag.kind)); err != nil {
			return fmt.Errorf("capture %s: tag index: %w", c.ID, err)
		}
	}
	return nil
}

// ---- the tag index ----

// A tag-index value (tagRef) mirrors what findings need, so they never
// decode stored JSON:
//
//	[0] kind: 't' the capture's TagID, 'o' a retag's OldTagID
//	[1] event code, [2] fate code, [3] 1 if deleted
//	[4:12] captured_at as Unix nanoseconds, big-endian two's complement
const refLen = 12

const (
	refTag    = 't'
	refOldTag = 'o'
)

type indexedTag struct {
	tag  string
	kind byte
}

func indexedTags(c *Capture) []indexedTag {
	out := []indexedTag{{c.TagID, refTag}}
	if c.OldTagID != "" && c.OldTagID != c.TagID {
		out = append(out, indexedTag{c.OldTagID, refOldTag})
	}
	return out
}

var eventCodes = map[Event]byte{EventNewMark: 1, EventRecapture: 2, EventResight: 3, EventRetag: 4, EventDeadRecovery: 5}
var fateCodes = map[Fate]byte{FateReleased: 1, FateDied: 2, FateRemoved: 3}

func encodeRef(c *Capture, kind byte) []byte {
	b := make([]byte, refLen)
	b[0] = kind
	b[1] = eventCodes[c.Event]
	b[2] = fateCodes[c.Fate]
	if c.Revision.Deleted {
		b[3] = 1
	}
	copy(b[4:], put64(uint64(unixNano(c.CapturedAt))))
	return b
}

// unixNano is t.UnixNano clamped to the years it can represent.
func unixNano(t time.Time) int64 {
	if t.Before(time.Unix(0, -1<<63+1)) {
		return -1<<63 + 1
	}
	if t.After(time.Unix(0, 1<<63-1)) {
		return 1<<63 - 1
	}
	return t.UnixNano()
}

type tagRef struct {
	id      [16]byte
	kind    byte
	event   byte
	fate    byte
	deleted bool
	at      int64
}

func (r tagRef) lost() bool {
	return r.fate == fateCodes[FateDied] || r.fate == fateCodes[FateRemoved] || r.event == eventCodes[EventDeadRecovery]
}

// refsFor lists the tag-index entries of one tag in a study.
func (t *Tx) refsFor(studyID, tag string) []tagRef {
	prefix := tagPrefix(studyID, tag)
	var out []tagRef
	cur := t.tags.Cursor()
	for k, v := cur.Seek(prefix); k != nil && bytes.HasPrefix(k, prefix); k, v = cur.Next() {
		if len(k) != len(prefix)+16 || len(v) != refLen {
			continue
		}
		r := tagRef{kind: v[0], event: v[1], fate: v[2], deleted: v[3] == 1, at: int64(be64(v[4:]))}
		copy(r.id[:], k[len(prefix):])
		out = append(out, r)
	}
	return out
}

// indexFindings compares c with the other live records of its tags.
func (t *Tx) indexFindings(c *Capture) Findings {
	self, _ := uuid.Parse(c.ID) // zero UUID when c.ID is empty
	at := unixNano(c.CapturedAt)
	others := func(tag string) []tagRef {
		var out []tagRef
		for _, r := range t.refsFor(c.StudyID, tag) {
			if !r.deleted && r.id != self {
				out = append(out, r)
			}
		}
		return out
	}
	seenBy := func(refs []tagRef, before int64, orEqual bool) int {
		n := 0
		for _, r := range refs {
			if r.at < before || (orEqual && r.at == before) {
				n++
			}
		}
		return n
	}
	var fs Findings
	neverMarked := func(field, tag string, refs []tagRef) {
		if seenBy(refs, at, true) == 0 {
			fs = append(fs, Finding{Code: FindingNeverMarked, Field: field,
				Message: fmt.Sprintf("no earlier record in the study marks tag %q; check the tag reading, or add the missing marking record", tag)})
		}
	}
	afterLoss := func(field, tag string, refs []tagRef) {
		for _, r := range refs {
			if r.at < at && r.lost() {
				fs = append(fs, Finding{Code: FindingAfterLoss, Field: field,
					Message: fmt.Sprintf("tag %q was recorded dead or removed at %s, before this record", tag, time.Unix(0, r.at).UTC().Format(time.RFC3339))})
				return
			}
		}
	}
	cur := others(c.TagID)
	switch c.Event {
	case EventNewMark:
		if len(cur) > 0 {
			fs = append(fs, Finding{Code: FindingAlreadyMarked, Field: "tag_id",
				Message: fmt.Sprintf("tag %q is already used by %d other record(s) in the study; a new mark needs an unused tag", c.TagID, len(cur))})
		}
	case EventRecapture, EventResight, EventDeadRecovery:
		neverMarked("tag_id", c.TagID, cur)
		if c.Event != EventDeadRecovery {
			afterLoss("tag_id", c.TagID, cur)
		}
	case EventRetag:
		old := others(c.OldTagID)
		neverMarked("old_tag_id", c.OldTagID, old)
		afterLoss("old_tag_id", c.OldTagID, old)
		if n := seenBy(cur, at, false); n > 0 {
			fs = append(fs, Finding{Code: FindingAlreadyMarked, Field: "tag_id",
				Message: fmt.Sprintf("new tag %q was already used by %d earlier record(s) in the study", c.TagID, n)})
		}
	}
	return fs
}

// checkIndex verifies the store's own invariant between captures and the
// tag index (used by Store.Check and storetest).
func checkIndex(tx *bolt.Tx) error {
	caps, tags := tx.Bucket(bucketCaptures), tx.Bucket(bucketTags)
	want := 0
	err := caps.ForEach(func(k, v []byte) error {
		var c Capture
		if err := json.Unmarshal(v, &c); err != nil {
			return fmt.Errorf("capture key %x: unreadable: %w", k, err)
		}
		u, err := uuid.Parse(c.ID)
		if err != nil || !bytes.Equal(k, captureKeyRaw(c.StudyID, u[:])) {
			return fmt.Errorf("capture key %x does not match its study %q and ID %q", k, c.StudyID, c.ID)
		}
		for _, it := range indexedTags(&c) {
			got := tags.Get(append(tagPrefix(c.StudyID, it.tag), u[:]...))
			if !bytes.Equal(got, encodeRef(&c, it.kind)) {
				return fmt.Errorf("capture %s: tag index entry for %q is missing or stale", c.ID, it.tag)
			}
			want++
		}
		return nil
	})
	if err != nil {
		return err
	}
	if n := tags.Stats().KeyN; n != want {
		return fmt.Errorf("tag index has %d entries, the captures need %d", n, want)
	}
	return nil
}
