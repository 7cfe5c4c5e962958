package sync

import (
	"errors"
	"slices"
	"strings"
	"testing"

	"tagtally/capture"
)

const rec1 = "01890a5d-ac96-774b-bcce-b302099a8057"

// permutations returns every order of 0..n-1.
func permutations(n int) [][]int {
	if n == 1 {
		return [][]int{{0}}
	}
	var out [][]int
	for _, p := range permutations(n - 1) {
		for i := 0; i <= len(p); i++ {
			q := append(append(append([]int{}, p[:i]...), n-1), p[i:]...)
			out = append(out, q)
		}
	}
	return out
}

type view struct {
	leaves   []string
	winner   string
	conflict bool
	deleted  bool
	notes    string
}

func viewOf(t *testing.T, e *Engine, m *memBackend, id string) view {
	t.Helper()
	h, err := e.History(testStudy, id)
	if err != nil {
		t.Fatal(err)
	}
	cur := m.cur[id]
	if cur.Revision.ID != h.Winner || cur.Revision.Conflict != h.Conflict {
		t.Fatalf("stored record shows %s (conflict %v), history says winner %s (conflict %v)", cur.Revision.ID, cur.Revision.Conflict, h.Winner, h.Conflict)
	}
	return view{h.Leaves, h.Winner, h.Conflict, cur.Revision.Deleted, cur.Notes}
}

// The classic cases: every arrival order of the same revisions, one by one
// or in one batch, ends in the same leaves and provisional winner.
func TestClassicCasesEveryOrder(t *testing.T) {
	root := phoneRev(t, body(rec1, 1), nil, false, st(1000, "phone-a"))
	edA := phoneRev(t, body(rec1, 2), []string{root.Revision.ID}, false, st(2000, "phone-a"))
	edB := phoneRev(t, body(rec1, 3), []string{root.Revision.ID}, false, st(3000, "phone-b"))
	del := phoneRev(t, body(rec1, 1), []string{root.Revision.ID}, true, st(9000, "phone-c"))
	edA2 := phoneRev(t, body(rec1, 4), []string{edA.Revision.ID}, false, st(1500, "phone-a")) // older clock, longer history
	resolve := phoneRev(t, body(rec1, 5), []string{edA.Revision.ID, edB.Revision.ID}, false, st(4000, "coordinator"))

	cases := []struct {
		name     string
		revs     []*capture.Capture
		leaves   []string
		winner   string
		conflict bool
	}{
		// Two concurrent edits: both kept; same depth, so the later stamp
		// leads provisionally.
		{"concurrent edits", []*capture.Capture{root, edA, edB}, []string{edA.Revision.ID, edB.Revision.ID}, edB.Revision.ID, true},
		// An edit racing a delete is a conflict, and live beats deleted
		// even though the delete's stamp is later.
		{"edit racing delete", []*capture.Capture{root, edA, del}, []string{edA.Revision.ID, del.Revision.ID}, edA.Revision.ID, true},
		// A longer history beats a later stamp.
		{"longer history wins", []*capture.Capture{root, edA, edA2, edB}, []string{edA2.Revision.ID, edB.Revision.ID}, edA2.Revision.ID, true},
		// A resolution whose parents are all the leaves leaves one leaf.
		{"resolution merges leaves", []*capture.Capture{root, edA, edB, resolve}, []string{resolve.Revision.ID}, resolve.Revision.ID, false},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			want := slices.Clone(tc.leaves)
			slices.Sort(want)
			for _, perm := range permutations(len(tc.revs)) {
				order := make([]*capture.Capture, len(perm))
				for i, p := range perm {
					order[i] = tc.revs[p]
				}
				// One batch in this order (the batch sorts out parents).
				e1, m1 := newMemEngine("server")
				m1.studies[testStudy] = true
				for _, r := range mustApply(t, e1, "phone", order...) {
					if r.Status != StatusStored {
						t.Fatalf("order %v: %+v", perm, r)
					}
				}
				// One revision per push, retrying those whose parent is
				// not there yet, as a phone's outbox would.
				e2, m2 := newMemEngine("server")
				m2.studies[testStudy] = true
				pending := order
				for round := 0; len(pending) > 0; round++ {
					if round > len(order) {
						t.Fatalf("order %v: outbox never drains", perm)
					}
					var again []*capture.Capture
					for _, r := range pending {
						res := mustApply(t, e2, "phone", r)[0]
						if res.Status == StatusRejected {
							if !res.Retry || !strings.Contains(res.Reason, ErrMissingParent.Error()) {
								t.Fatalf("order %v: %+v", perm, res)
							}
							again = append(again, r)
						}
					}
					pending = again
				}
				for _, v := range []view{viewOf(t, e1, m1, rec1), viewOf(t, e2, m2, rec1)} {
					if !slices.Equal(v.leaves, want) || v.winner != tc.winner || v.conflict != tc.conflict {
						t.Fatalf("order %v: leaves %v winner %s conflict %v; want %v %s %v", perm, v.leaves, v.winner, v.conflict, want, tc.winner, tc.conflict)
					}
				}
			}
		})
	}
}

func TestSameEditTwiceAndStampAgreement(t *testing.T) {
	root := phoneRev(t, body(rec1, 1), nil, false, st(5000, "phone-a"))
	// The same edit made on two devices: same ID, different stamps.
	sameB := phoneRev(t, body(rec1, 1), nil, false, st(4000, "phone-b"))
	if root.Revision.ID != sameB.Revision.ID {
		t.Fatal("same parents, body and flag must give the same ID")
	}
	for _, order := range [][]*capture.Capture{{root, sameB}, {sameB, root}} {
		e, m := newMemEngine("server", testStudy)
		r := mustApply(t, e, "x", order[0])[0]
		r2 := mustApply(t, e, "y", order[1])[0]
		if r.Status != StatusStored || r2.Status != StatusAlreadyHad {
			t.Fatalf("statuses %v %v", r.Status, r2.Status)
		}
		if got := m.cur[rec1].Revision.Stamp; got != sameB.Revision.Stamp {
			t.Fatalf("kept stamp %s, want the smaller %s", got, sameB.Revision.Stamp)
		}
		// A third sending changes nothing and adds nothing to the feed.
		n := len(m.feed)
		if r3 := mustApply(t, e, "z", order[0])[0]; r3.Status != StatusAlreadyHad || len(m.feed) != n {
			t.Fatalf("re-send: %v, feed %d -> %d", r3.Status, n, len(m.feed))
		}
	}
}

func TestBadRevisionRejectsOnlyItself(t *testing.T) {
	e, m := newMemEngine("server", testStudy)
	good := phoneRev(t, body(rec1, 1), nil, false, st(1000, "p"))
	forged := phoneRev(t, body("01890a5d-ac96-774b-bcce-b302099a8058", 2), nil, false, st(1000, "p"))
	forged.Notes = "changed after hashing"
	noStamp := phoneRev(t, body("01890a5d-ac96-774b-bcce-b302099a8059", 3), nil, false, st(1000, "p"))
	noStamp.Revision.Stamp = ""
	otherStudy := phoneRev(t, body("01890a5d-ac96-774b-bcce-b302099a805a", 4), nil, false, st(1000, "p"))
	otherStudy.StudyID = "no-such-study"
	otherStudy.Revision.ID = ""
	upper := phoneRev(t, body("01890A5D-AC96-774B-BCCE-B302099A805B", 5), nil, false, st(1000, "p"))
	res := mustApply(t, e, "p", forged, good, noStamp, otherStudy, upper)
	want := []struct {
		s   Status
		err error
	}{{StatusRejected, ErrRevisionID}, {StatusStored, nil}, {StatusRejected, ErrBadRevision}, {StatusRejected, ErrUnknownStudy}, {StatusRejected, ErrBadRevision}}
	for i, w := range want {
		if res[i].Status != w.s || (w.err != nil && !strings.Contains(res[i].Reason, w.err.Error())) || res[i].Retry {
			t.Errorf("revision %d: %+v, want %v %v", i, res[i], w.s, w.err)
		}
	}
	if len(m.cur) != 1 || len(m.feed) != 1 {
		t.Fatalf("stored %d records, feed %d; want 1, 1", len(m.cur), len(m.feed))
	}
	// A record cannot move to another study.
	m.studies["other"] = true
	moved := body(rec1, 9)
	moved.StudyID = "other"
	mv := phoneRev(t, moved, []string{good.Revision.ID}, false, st(2000, "p"))
	if r := mustApply(t, e, "p", mv)[0]; r.Status != StatusRejected || !strings.Contains(r.Reason, ErrStudyChanged.Error()) {
		t.Fatalf("moved record: %+v", r)
	}
}

func TestLocalEditsAndResolve(t *testing.T) {
	e, m := newMemEngine("camp", testStudy)
	c, _, err := e.Create(body("", 1))
	if err != nil {
		t.Fatal(err)
	}
	id := c.ID
	a, _, err := e.Update(body(id, 2)) // on the winner
	if err != nil {
		t.Fatal(err)
	}
	// An edit based on the first version, made without seeing a: conflict.
	old := body(id, 3)
	old.Revision.ID = c.Revision.ID
	b, _, err := e.Update(old)
	if err != nil {
		t.Fatal(err)
	}
	if !b.Revision.Conflict {
		t.Fatal("edit of an old version must make a conflict")
	}
	h, _ := e.History(testStudy, id)
	if len(h.Leaves) != 2 || len(h.Revisions) != 3 {
		t.Fatalf("history: %d leaves, %d revisions", len(h.Leaves), len(h.Revisions))
	}
	if _, _, err := e.Resolve(testStudy, id, body(id, 4), []string{a.Revision.ID}); !errors.Is(err, ErrStaleLeaves) {
		t.Fatalf("resolve with stale leaves: %v", err)
	}
	r, _, err := e.Resolve(testStudy, id, body(id, 4), h.Leaves)
	if err != nil {
		t.Fatal(err)
	}
	if r.Revision.Conflict || len(r.Revision.Parents) != 2 || r.Revision.Depth != 3 {
		t.Fatalf("resolution: %+v", r.Revision)
	}
	if _, err := e.Delete(testStudy, id); err != nil {
		t.Fatal(err)
	}
	if !m.cur[id].Revision.Deleted {
		t.Fatal("delete not shown")
	}
	h, _ = e.History(testStudy, id)
	if len(h.Revisions) != 5 || len(h.Leaves) != 1 {
		t.Fatalf("after delete: %d revisions, %d leaves", len(h.Revisions), len(h.Leaves))
	}
	if _, err := e.History("other", id); !errors.Is(err, capture.ErrNotFound) {
		t.Fatalf("history in wrong study: %v", err)
	}
	if _, _, err := e.Create(body(id, 7)); !errors.Is(err, capture.ErrConflict) {
		t.Fatalf("create existing: %v", err)
	}
}
