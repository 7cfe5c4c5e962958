package sync

import (
	"encoding/json"
	"fmt"
	"slices"
	"sort"

	"tagtally/capture"
)

// memBackend keeps a replica in maps: the merge rule, feed and checkpoints
// run exactly as on bbolt (same txn interface, same encodings), fast
// enough for tens of thousands of simulated schedules. Transactions are
// not isolated or rolled back: the engine's writes never fail here, and the
// simulation runs one replica operation at a time.
type memBackend struct {
	studies   map[string]bool
	records   map[string]recordState
	revisions map[string]map[string][]byte // capture ID -> rev ID -> stored
	cur       map[string]*capture.Capture
	feed      []feedEntry // seq i+1 at index i
	meta      map[string][]byte
}

func newMemBackend(studies ...string) *memBackend {
	m := &memBackend{
		studies: map[string]bool{}, records: map[string]recordState{},
		revisions: map[string]map[string][]byte{}, cur: map[string]*capture.Capture{},
		meta: map[string][]byte{},
	}
	for _, s := range studies {
		m.studies[s] = true
	}
	return m
}

func (m *memBackend) update(fn func(txn) error) error { return fn(m) }
func (m *memBackend) batch(fn func(txn) error) error  { return fn(m) }
func (m *memBackend) view(fn func(txn) error) error   { return fn(m) }

func (m *memBackend) prepare(c *capture.Capture) (capture.Findings, error) { return nil, nil }
func (m *memBackend) studyExists(id string) (bool, error)                  { return m.studies[id], nil }

func (m *memBackend) record(id string) (recordState, bool, error) {
	rs, ok := m.records[id]
	return rs.clone(), ok, nil
}

func (m *memBackend) putRecord(id string, rs recordState) error {
	m.records[id] = rs.clone()
	return nil
}

func (m *memBackend) revision(cid, rid string) ([]byte, bool, error) {
	v, ok := m.revisions[cid][rid]
	return v, ok, nil
}

func (m *memBackend) putRevision(cid, rid string, val []byte) error {
	if m.revisions[cid] == nil {
		m.revisions[cid] = map[string][]byte{}
	}
	m.revisions[cid][rid] = slices.Clone(val)
	return nil
}

func (m *memBackend) forEachRevision(cid string, fn func([]byte) error) error {
	ids := make([]string, 0, len(m.revisions[cid]))
	for id := range m.revisions[cid] {
		ids = append(ids, id)
	}
	sort.Strings(ids)
	for _, id := range ids {
		if err := fn(m.revisions[cid][id]); err != nil {
			return err
		}
	}
	return nil
}

func (m *memBackend) current(studyID, cid string) (*capture.Capture, error) {
	c, ok := m.cur[cid]
	if !ok || c.StudyID != studyID {
		return nil, fmt.Errorf("capture %s: %w", cid, capture.ErrNotFound)
	}
	return cloneCapture(c), nil
}

func (m *memBackend) putCurrent(c *capture.Capture) error {
	m.cur[c.ID] = cloneCapture(c)
	return nil
}

func (m *memBackend) studyIDs() ([]string, error) {
	var ids []string
	for id := range m.studies {
		ids = append(ids, id)
	}
	sort.Strings(ids)
	return ids, nil
}

func (m *memBackend) forEachCapture(studyID string, fn func(*capture.Capture) error) error {
	ids := make([]string, 0, len(m.cur))
	for id, c := range m.cur {
		if c.StudyID == studyID {
			ids = append(ids, id)
		}
	}
	sort.Strings(ids)
	for _, id := range ids {
		if err := fn(cloneCapture(m.cur[id])); err != nil {
			return err
		}
	}
	return nil
}

func (m *memBackend) appendFeed(e feedEntry) (uint64, error) {
	m.feed = append(m.feed, e)
	return uint64(len(m.feed)), nil
}

func (m *memBackend) feedAfter(after uint64, fn func(uint64, feedEntry) (bool, error)) error {
	for i := after; i < uint64(len(m.feed)); i++ {
		more, err := fn(i+1, m.feed[i])
		if err != nil || !more {
			return err
		}
	}
	return nil
}

func (m *memBackend) lastSeq() (uint64, error) { return uint64(len(m.feed)), nil }

func (m *memBackend) getMeta(k string) ([]byte, error) { return slices.Clone(m.meta[k]), nil }
func (m *memBackend) putMeta(k string, v []byte) error { m.meta[k] = slices.Clone(v); return nil }

// newMemEngine makes an engine on a fresh in-memory replica.
func newMemEngine(device string, studies ...string) (*Engine, *memBackend) {
	m := newMemBackend(studies...)
	e, err := newEngine(m, "", Options{Device: device})
	if err != nil {
		panic(err)
	}
	return e, m
}

// wire turns stored revisions into what travels: JSON decoded afresh.
func wire(raws []json.RawMessage) []*capture.Capture {
	out := make([]*capture.Capture, len(raws))
	for i, r := range raws {
		out[i] = new(capture.Capture)
		if err := json.Unmarshal(r, out[i]); err != nil {
			panic(err)
		}
	}
	return out
}
