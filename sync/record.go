package sync

import (
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"fmt"

	"github.com/google/uuid"

	"tagtally/capture"
)

// leaf is the part of a leaf revision the merge rule needs.
type leaf struct {
	id      string
	depth   int
	stamp   string // Stamp.String form; its byte order is stamp order
	device  string
	deleted bool
}

// better reports whether leaf a is a better provisional winner than b:
// live before deleted, then the longer history (Depth), then the later
// stamp, then the greater revision ID. Every replica holding the same
// leaves picks the same winner; the choice is only provisional while the
// record is in conflict.
func better(a, b leaf) bool {
	if a.deleted != b.deleted {
		return !a.deleted
	}
	if a.depth != b.depth {
		return a.depth > b.depth
	}
	if a.stamp != b.stamp {
		return a.stamp > b.stamp
	}
	return a.id > b.id
}

// winner returns the index of the best leaf; ls must not be empty.
func winner(ls []leaf) int {
	w := 0
	for i := 1; i < len(ls); i++ {
		if better(ls[i], ls[w]) {
			w = i
		}
	}
	return w
}

// recordState is what sync keeps per record besides its revisions: the
// study it belongs to and its leaves.
type recordState struct {
	study  string
	leaves []leaf
}

func (rs recordState) clone() recordState {
	return recordState{study: rs.study, leaves: append([]leaf(nil), rs.leaves...)}
}

// Binary encodings, shared by every backend so that stored bytes do not
// depend on the backend. Strings are uvarint length + bytes.

func appendStr(b []byte, s string) []byte {
	b = binary.AppendUvarint(b, uint64(len(s)))
	return append(b, s...)
}

func readStr(b []byte) (string, []byte, error) {
	n, k := binary.Uvarint(b)
	if k <= 0 || uint64(len(b)-k) < n {
		return "", nil, errCorrupt
	}
	return string(b[k : k+int(n)]), b[k+int(n):], nil
}

func readUvarint(b []byte) (uint64, []byte, error) {
	n, k := binary.Uvarint(b)
	if k <= 0 {
		return 0, nil, errCorrupt
	}
	return n, b[k:], nil
}

var errCorrupt = fmt.Errorf("sync: stored sync record is corrupt")

func encodeRecordState(rs recordState) []byte {
	b := []byte{1}
	b = appendStr(b, rs.study)
	b = binary.AppendUvarint(b, uint64(len(rs.leaves)))
	for _, l := range rs.leaves {
		b = appendStr(b, l.id)
		b = binary.AppendUvarint(b, uint64(l.depth))
		b = appendStr(b, l.stamp)
		b = appendStr(b, l.device)
		if l.deleted {
			b = append(b, 1)
		} else {
			b = append(b, 0)
		}
	}
	return b
}

func decodeRecordState(b []byte) (recordState, error) {
	var rs recordState
	if len(b) == 0 || b[0] != 1 {
		return rs, errCorrupt
	}
	var err error
	if rs.study, b, err = readStr(b[1:]); err != nil {
		return rs, err
	}
	n, b, err := readUvarint(b)
	if err != nil || n > uint64(len(b)) {
		return rs, errCorrupt
	}
	rs.leaves = make([]leaf, n)
	for i := range rs.leaves {
		l := &rs.leaves[i]
		if l.id, b, err = readStr(b); err != nil {
			return rs, err
		}
		var d uint64
		if d, b, err = readUvarint(b); err != nil {
			return rs, err
		}
		l.depth = int(d)
		if l.stamp, b, err = readStr(b); err != nil {
			return rs, err
		}
		if l.device, b, err = readStr(b); err != nil {
			return rs, err
		}
		if len(b) < 1 {
			return rs, errCorrupt
		}
		l.deleted = b[0] == 1
		b = b[1:]
	}
	return rs, nil
}

// A stored revision is a binary header with the revision metadata (what
// the merge rule needs comes first, so deciding a merge never decodes
// JSON), then the canonical body (see CanonicalBody), which is valid JSON
// of the capture without its revision:
//
//	0x02, uvarint depth, deleted byte, str stamp, str device, str ID,
//	uvarint number of parents, str parent..., canonical body
//
// Storing the canonical body, already computed to check the ID, saves
// encoding the record again.
func encodeRevision(c *capture.Capture, body []byte) []byte {
	r := &c.Revision
	b := make([]byte, 0, len(body)+96+33*len(r.Parents))
	b = append(b, 2)
	b = binary.AppendUvarint(b, uint64(r.Depth))
	if r.Deleted {
		b = append(b, 1)
	} else {
		b = append(b, 0)
	}
	b = appendStr(b, r.Stamp)
	b = appendStr(b, r.Device)
	b = appendStr(b, r.ID)
	b = binary.AppendUvarint(b, uint64(len(r.Parents)))
	for _, p := range r.Parents {
		b = appendStr(b, p)
	}
	return append(b, body...)
}

// revHeader decodes the part of a stored revision the merge rule needs
// (depth, deleted, stamp, device; not the ID).
func revHeader(b []byte) (l leaf, err error) {
	if len(b) == 0 || b[0] != 2 {
		return l, errCorrupt
	}
	d, b, err := readUvarint(b[1:])
	if err != nil || len(b) < 1 {
		return l, errCorrupt
	}
	l.depth = int(d)
	l.deleted = b[0] == 1
	if l.stamp, b, err = readStr(b[1:]); err != nil {
		return l, err
	}
	l.device, _, err = readStr(b)
	return l, err
}

// decodeStored splits a stored revision into its metadata and body.
func decodeStored(b []byte) (capture.Revision, []byte, error) {
	var r capture.Revision
	l, err := revHeader(b)
	if err != nil {
		return r, nil, err
	}
	r.Depth, r.Deleted, r.Stamp, r.Device = l.depth, l.deleted, l.stamp, l.device
	// Skip what revHeader read.
	_, b, _ = readUvarint(b[1:])
	b = b[1:]
	_, b, _ = readStr(b)
	_, b, _ = readStr(b)
	if r.ID, b, err = readStr(b); err != nil {
		return r, nil, err
	}
	n, b, err := readUvarint(b)
	if err != nil || n > uint64(len(b)) {
		return r, nil, errCorrupt
	}
	if n > 0 {
		r.Parents = make([]string, n)
	}
	for i := range r.Parents {
		if r.Parents[i], b, err = readStr(b); err != nil {
			return r, nil, err
		}
	}
	return r, b, nil
}

func decodeRevision(b []byte) (*capture.Capture, error) {
	r, body, err := decodeStored(b)
	if err != nil {
		return nil, err
	}
	c := new(capture.Capture)
	if err := json.Unmarshal(body, c); err != nil {
		return nil, fmt.Errorf("%w: %v", errCorrupt, err)
	}
	c.Revision = r
	return c, nil
}

// wireJSON is a stored revision as sent: the canonical body with a
// "revision" member added.
func wireJSON(b []byte) ([]byte, error) {
	r, body, err := decodeStored(b)
	if err != nil {
		return nil, err
	}
	rj, err := json.Marshal(r)
	if err != nil {
		return nil, err
	}
	if len(body) < 2 || body[0] != '{' || body[len(body)-1] != '}' {
		return nil, errCorrupt
	}
	out := make([]byte, 0, len(body)+len(rj)+13)
	out = append(out, body[:len(body)-1]...)
	if len(body) > 2 {
		out = append(out, ',')
	}
	out = append(out, `"revision":`...)
	out = append(out, rj...)
	return append(out, '}'), nil
}

// Keys: a record is its UUID's 16 bytes (UUID v7 keys are time-ordered,
// which keeps inserts on the right-hand pages); a revision is the record
// key then the revision ID's 16 bytes.

func recordKey(captureID string) ([]byte, error) {
	u, err := uuid.Parse(captureID)
	if err != nil {
		return nil, fmt.Errorf("%w: capture ID %q is not a UUID", ErrBadRevision, captureID)
	}
	return u[:], nil
}

func revisionKey(captureID, revID string) ([]byte, error) {
	k, err := recordKey(captureID)
	if err != nil {
		return nil, err
	}
	r, err := hex.DecodeString(revID)
	if err != nil || len(r) != 16 {
		return nil, fmt.Errorf("%w: revision ID %q is not 32 hex digits", ErrBadRevision, revID)
	}
	return append(append(make([]byte, 0, 32), k...), r...), nil
}

// feedEntry is one change-feed position: which revision was stored (or had
// its stamp lowered), and the replica it came from ("" for a local edit),
// so a pull can leave out what the puller sent.
type feedEntry struct {
	captureID string
	revID     string
	source    string
}

func encodeFeedEntry(e feedEntry) []byte {
	b := []byte{1}
	b = appendStr(b, e.captureID)
	b = appendStr(b, e.revID)
	return appendStr(b, e.source)
}

func decodeFeedEntry(b []byte) (feedEntry, error) {
	var e feedEntry
	if len(b) == 0 || b[0] != 1 {
		return e, errCorrupt
	}
	var err error
	if e.captureID, b, err = readStr(b[1:]); err != nil {
		return e, err
	}
	if e.revID, b, err = readStr(b); err != nil {
		return e, err
	}
	e.source, _, err = readStr(b)
	return e, err
}
