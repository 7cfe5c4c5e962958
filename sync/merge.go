package sync

import (
	"errors"
	"fmt"
	"slices"
	"strings"
	"unicode"

	"github.com/google/uuid"

	"tagtally/capture"
)

// txn is one transaction on a replica's storage: the bbolt store in
// production (boltTxn), plain maps in the simulation tests. The merge rule
// below is written once against it, so the simulation exercises the same
// code the server runs.
type txn interface {
	// prepare validates a locally edited record and fills derived fields
	// (the occasion), as the capture store does for its own writes.
	prepare(c *capture.Capture) (capture.Findings, error)
	studyExists(id string) (bool, error)
	record(captureID string) (recordState, bool, error)
	putRecord(captureID string, rs recordState) error
	// revision returns a stored revision's bytes (see encodeRevision);
	// valid only during the transaction.
	revision(captureID, revID string) ([]byte, bool, error)
	putRevision(captureID, revID string, val []byte) error
	forEachRevision(captureID string, fn func(val []byte) error) error
	// current is the record as the capture store holds it (the winner).
	current(studyID, captureID string) (*capture.Capture, error)
	// putCurrent writes c to the capture store, keeping nothing of c.
	putCurrent(c *capture.Capture) error
	// forEachCapture visits every record of a study in the capture store.
	forEachCapture(studyID string, fn func(c *capture.Capture) error) error
	appendFeed(e feedEntry) (uint64, error)
	// feedAfter calls fn for entries with seq > after in order until fn
	// returns false.
	feedAfter(after uint64, fn func(seq uint64, e feedEntry) (bool, error)) error
	lastSeq() (uint64, error)
	getMeta(key string) ([]byte, error)
	putMeta(key string, v []byte) error
}

// Status says what a replica did with one pushed or pulled revision.
type Status string

const (
	// StatusStored: the revision is new here and is now stored (committed
	// before the reply was sent).
	StatusStored Status = "stored"
	// StatusAlreadyHad: the replica already had this revision.
	StatusAlreadyHad Status = "already_had"
	// StatusRejected: not stored; Reason says why. With Retry the cause
	// may go away (a parent not yet sent): keep it and send it again.
	StatusRejected Status = "rejected"
)

// Result is the outcome for one revision.
type Result struct {
	CaptureID string `json:"capture_id"`
	Revision  string `json:"revision"`
	Status    Status `json:"status"`
	Reason    string `json:"reason,omitempty"`
	Retry     bool   `json:"retry,omitempty"`
	// Conflict: after this revision the record has more than one leaf.
	Conflict bool `json:"conflict,omitempty"`
	// Warning notes something accepted but odd, e.g. a clock far ahead.
	Warning string `json:"warning,omitempty"`
}

// Confirmed reports whether the replica holds the revision durably, i.e.
// the sender may clear it from its outbox.
func (r Result) Confirmed() bool { return r.Status == StatusStored || r.Status == StatusAlreadyHad }

const maxParents = 64

// checkRevision checks what can be checked of a revision without storage:
// identifiers, stamp, parents, and that its ID is the hash of its content.
// An empty Revision.ID is filled in. It returns the canonical body. It
// never panics on any input.
func checkRevision(c *capture.Capture) ([]byte, error) {
	u, err := uuid.Parse(c.ID)
	if err != nil {
		return nil, fmt.Errorf("%w: capture ID %q is not a UUID", ErrBadRevision, c.ID)
	}
	if u.String() != c.ID {
		return nil, fmt.Errorf("%w: capture ID %q is not in canonical lower-case form %q", ErrBadRevision, c.ID, u.String())
	}
	for _, f := range []struct{ name, v string }{{"study_id", c.StudyID}, {"tag_id", c.TagID}, {"old_tag_id", c.OldTagID}, {"revision.device", c.Revision.Device}} {
		if (f.name == "study_id" || f.name == "tag_id") && strings.TrimSpace(f.v) == "" {
			return nil, fmt.Errorf("%w: %s is missing", ErrBadRevision, f.name)
		}
		if len(f.v) > 128 {
			return nil, fmt.Errorf("%w: %s is longer than 128 bytes", ErrBadRevision, f.name)
		}
		for _, r := range f.v {
			if unicode.IsControl(r) || r == unicode.ReplacementChar {
				return nil, fmt.Errorf("%w: %s has a control or invalid character", ErrBadRevision, f.name)
			}
		}
	}
	if c.Revision.Stamp == "" {
		return nil, fmt.Errorf("%w: revision.stamp is missing", ErrBadRevision)
	}
	if _, err := ParseStamp(c.Revision.Stamp); err != nil {
		return nil, fmt.Errorf("%w: revision.stamp: %w", ErrBadRevision, err)
	}
	ps := c.Revision.Parents
	if len(ps) > maxParents {
		return nil, fmt.Errorf("%w: more than %d parents", ErrBadRevision, maxParents)
	}
	for i, p := range ps {
		if !isRevID(p) {
			return nil, fmt.Errorf("%w: parent %q is not 32 lower-case hex digits", ErrBadRevision, p)
		}
		if slices.Contains(ps[:i], p) {
			return nil, fmt.Errorf("%w: parent %s is named twice", ErrBadRevision, p)
		}
	}
	body, err := CanonicalBody(c)
	if err != nil {
		return nil, err
	}
	id := revisionID(body, ps, c.Revision.Deleted)
	switch c.Revision.ID {
	case "":
		c.Revision.ID = id
	case id:
	default:
		return nil, fmt.Errorf("%w: given %q, content hashes to %s", ErrRevisionID, c.Revision.ID, id)
	}
	if slices.Contains(ps, id) {
		return nil, fmt.Errorf("%w: revision names itself as parent", ErrBadRevision)
	}
	c.Revision.Conflict = false
	return body, nil
}

func isRevID(s string) bool {
	if len(s) != 32 {
		return false
	}
	for i := 0; i < len(s); i++ {
		if c := s[i]; !(c >= '0' && c <= '9' || c >= 'a' && c <= 'f') {
			return false
		}
	}
	return true
}

// stampKey orders (stamp, device) pairs; the smaller is kept when one
// revision arrives with two different stamps (two devices made the same
// edit), so that every replica ends with the same one.
func stampLess(s1, d1, s2, d2 string) bool {
	if s1 != s2 {
		return s1 < s2
	}
	return d1 < d2
}

// merge stores one checked revision (see checkRevision) in t. The returned
// error is a storage failure that must abort the transaction; a revision
// that cannot be stored gets a StatusRejected result instead.
//
// Invariants kept here, per record:
//   - every stored revision's parents are stored (a revision with a
//     missing parent is refused with Retry), so ancestry is complete;
//   - leaves are exactly the stored revisions that are no stored
//     revision's parent; a new revision has no stored children, so
//     leaves' = leaves - parents + {new};
//   - Depth = 1 + the largest parent Depth (1 for a root);
//   - the capture store holds the best leaf (see better) with Conflict set
//     when there is more than one leaf;
//   - every stored revision, and every lowering of a stored revision's
//     stamp, takes the next feed sequence in the same transaction.
func merge(t txn, c *capture.Capture, body []byte, source string) (Result, error) {
	res := Result{CaptureID: c.ID, Revision: c.Revision.ID}
	reject := func(err error, retry bool) (Result, error) {
		res.Status, res.Reason, res.Retry = StatusRejected, err.Error(), retry
		return res, nil
	}
	cid, rid := c.ID, c.Revision.ID
	// The record state first: a revision and its record's state are
	// stored in one transaction, so a record unknown here has none of its
	// revisions stored (no lookup needed), and a revision that is one of
	// the leaves is known from the state alone (a re-sent edit, the
	// common case of a re-push).
	rs, exists, err := t.record(cid)
	if err != nil {
		return res, err
	}
	if exists {
		have, val := false, []byte(nil)
		var h leaf
		if i := slices.IndexFunc(rs.leaves, func(l leaf) bool { return l.id == rid }); i >= 0 {
			have, h = true, rs.leaves[i]
		} else if val, have, err = t.revision(cid, rid); err != nil {
			return res, err
		} else if have {
			if h, err = revHeader(val); err != nil {
				return res, fmt.Errorf("revision %s of %s: %w", rid, cid, err)
			}
		}
		if have {
			res.Status = StatusAlreadyHad
			res.Conflict = len(rs.leaves) > 1
			if !stampLess(c.Revision.Stamp, c.Revision.Device, h.stamp, h.device) {
				return res, nil
			}
			if val == nil {
				if val, have, err = t.revision(cid, rid); err != nil || !have {
					if err == nil {
						err = fmt.Errorf("record %s: leaf %s: %w", cid, rid, errCorrupt)
					}
					return res, err
				}
			}
			return res, lowerStamp(t, cid, rid, val, c.Revision.Stamp, c.Revision.Device, source, rs, &res)
		}
	}
	if exists && rs.study != c.StudyID {
		return reject(fmt.Errorf("%w: record %s belongs to study %q, not %q", ErrStudyChanged, cid, rs.study, c.StudyID), false)
	}
	if !exists {
		ok, err := t.studyExists(c.StudyID)
		if err != nil {
			return res, err
		}
		if !ok {
			return reject(fmt.Errorf("%w: %q", ErrUnknownStudy, c.StudyID), false)
		}
	}
	depth := 1
	for _, p := range c.Revision.Parents {
		if i := slices.IndexFunc(rs.leaves, func(l leaf) bool { return l.id == p }); i >= 0 {
			depth = max(depth, rs.leaves[i].depth+1)
			continue
		}
		val, ok, err := t.revision(cid, p)
		if err != nil {
			return res, err
		}
		if !ok {
			return reject(fmt.Errorf("%w: %s", ErrMissingParent, p), true)
		}
		h, err := revHeader(val)
		if err != nil {
			return res, fmt.Errorf("revision %s of %s: %w", p, cid, err)
		}
		depth = max(depth, h.depth+1)
	}
	c.Revision.Depth = depth
	c.Revision.Conflict = false
	if err := t.putRevision(cid, rid, encodeRevision(c, body)); err != nil {
		return res, err
	}
	nl := make([]leaf, 0, len(rs.leaves)+1)
	for _, l := range rs.leaves {
		if !slices.Contains(c.Revision.Parents, l.id) {
			nl = append(nl, l)
		}
	}
	nl = append(nl, leaf{id: rid, depth: depth, stamp: c.Revision.Stamp, device: c.Revision.Device, deleted: c.Revision.Deleted})
	rs = recordState{study: c.StudyID, leaves: nl}
	if err := t.putRecord(cid, rs); err != nil {
		return res, err
	}
	if err := setCurrent(t, cid, rs, c); err != nil {
		return res, err
	}
	if _, err := t.appendFeed(feedEntry{captureID: cid, revID: rid, source: source}); err != nil {
		return res, err
	}
	res.Status = StatusStored
	res.Conflict = len(nl) > 1
	return res, nil
}

// lowerStamp replaces a stored revision's stamp by a smaller one; rs is
// its record's state.
func lowerStamp(t txn, cid, rid string, val []byte, stamp, device, source string, rs recordState, res *Result) error {
	r, body, err := decodeStored(val)
	if err != nil {
		return fmt.Errorf("revision %s of %s: %w", rid, cid, err)
	}
	r.Stamp, r.Device = stamp, device
	if err := t.putRevision(cid, rid, encodeRevision(&capture.Capture{Revision: r}, body)); err != nil {
		return err
	}
	for i := range rs.leaves {
		if rs.leaves[i].id == rid {
			rs.leaves[i].stamp, rs.leaves[i].device = stamp, device
			if err := t.putRecord(cid, rs); err != nil {
				return err
			}
			if err := setCurrent(t, cid, rs, nil); err != nil {
				return err
			}
		}
	}
	res.Conflict = len(rs.leaves) > 1
	_, err = t.appendFeed(feedEntry{captureID: cid, revID: rid, source: source})
	return err
}

// setCurrent writes the best leaf to the capture store, unless it is there
// already. fresh is the revision just stored, if any (saves a read).
func setCurrent(t txn, cid string, rs recordState, fresh *capture.Capture) error {
	w := rs.leaves[winner(rs.leaves)]
	conflict := len(rs.leaves) > 1
	if fresh != nil && fresh.Revision.ID == w.id {
		// The new revision is the winner as it stands (same stamp); only
		// its Conflict flag differs, set just for the write (putCurrent
		// keeps nothing of it), saving a copy per stored revision.
		was := fresh.Revision.Conflict
		fresh.Revision.Conflict = conflict
		err := t.putCurrent(fresh)
		fresh.Revision.Conflict = was
		return err
	}
	cur, err := t.current(rs.study, cid)
	switch {
	case err == nil && cur.Revision.ID == w.id:
		if cur.Revision.Conflict == conflict && cur.Revision.Stamp == w.stamp && cur.Revision.Device == w.device {
			return nil
		}
	case err == nil || errors.Is(err, capture.ErrNotFound):
		val, ok, err := t.revision(cid, w.id)
		if err != nil {
			return err
		}
		if !ok {
			return fmt.Errorf("record %s: leaf %s: %w", cid, w.id, errCorrupt)
		}
		if cur, err = decodeRevision(val); err != nil {
			return err
		}
	default:
		return err
	}
	cur.Revision.Stamp, cur.Revision.Device = w.stamp, w.device
	cur.Revision.Conflict = conflict
	return t.putCurrent(cur)
}

// cloneCapture copies c so that the copy shares no slices or pointers.
func cloneCapture(c *capture.Capture) *capture.Capture {
	out := *c
	cp := func(p *float64) *float64 {
		if p == nil {
			return nil
		}
		v := *p
		return &v
	}
	out.MassG, out.Lat, out.Lon, out.AccuracyM = cp(c.MassG), cp(c.Lat), cp(c.Lon), cp(c.AccuracyM)
	out.Measurements = slices.Clone(c.Measurements)
	out.Revision.Parents = slices.Clone(c.Revision.Parents)
	return &out
}

// applyBatch merges checked revisions in t in dependency order: a revision
// whose parent comes later in the same batch is retried after it, so a
// batch may arrive in any order. bodies[i] is revision i's canonical body,
// nil when the caller already rejected it; results[i] is filled for the
// others.
func applyBatch(t txn, revs []*capture.Capture, bodies [][]byte, source string, results []Result) error {
	pending := make([]int, 0, len(revs))
	for i := range revs {
		if bodies[i] != nil {
			pending = append(pending, i)
		}
	}
	for len(pending) > 0 {
		var again []int
		for _, i := range pending {
			r, err := merge(t, revs[i], bodies[i], source)
			if err != nil {
				return fmt.Errorf("capture %s revision %s: %w", revs[i].ID, revs[i].Revision.ID, err)
			}
			results[i] = r
			if r.Status == StatusRejected && r.Retry {
				again = append(again, i)
			}
		}
		if len(again) == len(pending) {
			break
		}
		pending = again
	}
	return nil
}
