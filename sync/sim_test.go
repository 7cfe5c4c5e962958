package sync

import (
	"bytes"
	"encoding/json"
	"flag"
	"fmt"
	"math/rand/v2"
	"slices"
	"testing"

	"tagtally/capture"
)

var simSchedules = flag.Int("sync.schedules", 10000, "number of seeded schedules in TestSimulation")

// simReplica is one replica in the simulation: an Engine on a backend.
type simReplica struct {
	e    *Engine
	feed func() int // current feed length
}

// simNet is one schedule: replicas, the revisions created, the messages
// in flight, and what every replica has confirmed to a sender.
type simNet struct {
	t         testing.TB
	rng       *rand.Rand
	reps      []*simReplica
	ids       []string
	created   map[string]string // revision ID -> capture ID
	confirmed map[string]string
	inflight  []func()
	moved     int // revisions carried by the last quiet round
}

func peerName(e *Engine) string { return "peer:" + e.Replica() }

func (n *simNet) check(err error) {
	if err != nil {
		n.t.Helper()
		n.t.Fatal(err)
	}
}

func (n *simNet) edit(r *simReplica) {
	cid := n.ids[n.rng.IntN(len(n.ids))]
	v := n.rng.IntN(4) // few distinct bodies: identical edits on two replicas happen
	h, err := r.e.History(testStudy, cid)
	var parents []string
	deleted := false
	if err == nil {
		switch k := n.rng.IntN(20); {
		case k < 2 && len(h.Leaves) > 1:
			parents = h.Leaves // resolution
		case k < 5:
			deleted = true
			parents = []string{h.Winner}
		case k < 8:
			parents = []string{h.Revisions[n.rng.IntN(len(h.Revisions))].Revision.ID}
		default:
			parents = []string{h.Winner}
		}
	}
	c, err := r.e.LocalEdit(body(cid, v), parents, deleted)
	n.check(err)
	n.created[c.Revision.ID] = cid
}

func (n *simNet) confirm(res []Result) bool {
	all := true
	for _, r := range res {
		if r.Confirmed() {
			n.confirmed[r.Revision] = r.CaptureID
		} else {
			if !r.Retry {
				n.t.Fatalf("permanent rejection in simulation: %+v", r)
			}
			all = false
		}
	}
	return all
}

// push sends one outbox page from a to b through a faulty network.
func (n *simNet) push(a, b *simReplica, size int, faults bool) {
	name := peerName(b.e)
	cp, err := a.e.PeerCheckpoint(name)
	n.check(err)
	cp.PeerReplica = b.e.Replica()
	page, after, through, err := a.e.outbox(cp, "", size)
	n.check(err)
	n.moved += len(page.Revisions)
	if len(page.Revisions) == 0 {
		n.check(a.e.confirmPushed(name, after, through))
		return
	}
	deliver := func(revs []*capture.Capture) bool {
		res, err := b.e.ApplyRemote(revs, a.e.Replica())
		n.check(err)
		return n.confirm(res)
	}
	ack := func() { n.check(a.e.confirmPushed(name, after, through)) }
	revs := wire(page.Revisions)
	f := 9
	if faults {
		f = n.rng.IntN(10)
	}
	switch f {
	case 0: // request lost
	case 1: // cut short: a shuffled part arrives, no reply
		n.rng.Shuffle(len(revs), func(i, j int) { revs[i], revs[j] = revs[j], revs[i] })
		deliver(revs[:n.rng.IntN(len(revs))])
	case 2: // reordered
		n.rng.Shuffle(len(revs), func(i, j int) { revs[i], revs[j] = revs[j], revs[i] })
		if deliver(revs) {
			ack()
		}
	case 3: // duplicated
		deliver(wire(page.Revisions))
		if deliver(revs) {
			ack()
		}
	case 4: // reply lost after the commit
		deliver(revs)
	case 5: // delayed: arrives (and is answered) later, maybe after newer ones
		n.inflight = append(n.inflight, func() {
			if deliver(revs) {
				ack()
			}
		})
	default:
		if deliver(revs) {
			ack()
		}
	}
}

// pull fetches one page of a's feed into b through a faulty network.
func (n *simNet) pull(b, a *simReplica, size int, faults bool) bool {
	name := peerName(a.e)
	cp, err := b.e.PeerCheckpoint(name)
	n.check(err)
	page, err := a.e.Pull(PullRequest{Cursor: cp.Pulled, SkipSource: b.e.Replica(), Limit: size})
	n.check(err)
	n.moved += len(page.Revisions)
	apply := func() {
		_, _, err := b.e.applyPage(name, cp.Pulled, page)
		n.check(err)
	}
	f := 9
	if faults {
		f = n.rng.IntN(8)
	}
	switch f {
	case 0: // reply lost
	case 1: // delayed
		n.inflight = append(n.inflight, apply)
	case 2: // duplicated
		apply()
		apply()
	default:
		apply()
	}
	return page.More
}

// syncAll runs pull then push between every ordered pair, without faults,
// until nothing is left to move; it returns the total feed growth.
func (n *simNet) syncAll() int {
	grew := 0
	for _, a := range n.reps {
		for _, b := range n.reps {
			if a == b {
				continue
			}
			before := a.feed() + b.feed()
			for n.pull(a, b, 50, false) {
			}
			for {
				name := peerName(b.e)
				cp, _ := a.e.PeerCheckpoint(name)
				cp.PeerReplica = b.e.Replica()
				page, _, _, err := a.e.outbox(cp, "", 50)
				n.check(err)
				n.push(a, b, 50, false)
				if !page.More {
					break
				}
			}
			grew += a.feed() + b.feed() - before
		}
	}
	return grew
}

func runSchedule(t testing.TB, seed uint64, makeReplica func(i int) *simReplica) {
	rng := rand.New(rand.NewPCG(seed, 0x5eed))
	n := &simNet{t: t, rng: rng, created: map[string]string{}, confirmed: map[string]string{}}
	nrep := 3 + rng.IntN(2)
	for i := 0; i < nrep; i++ {
		n.reps = append(n.reps, makeReplica(i))
	}
	n.ids = []string{"01890a5d-ac96-774b-bcce-b302099a8057", "01890a5d-ac96-774b-bcce-b302099a8058"}
	ops := 15 + rng.IntN(30)
	for op := 0; op < ops; op++ {
		a := n.reps[rng.IntN(nrep)]
		b := n.reps[rng.IntN(nrep)]
		switch k := rng.IntN(10); {
		case k < 4:
			n.edit(a)
		case a == b:
		case k < 6:
			n.push(a, b, 1+rng.IntN(4), true)
		case k < 8:
			n.pull(a, b, 1+rng.IntN(4), true)
		case len(n.inflight) > 0:
			i := rng.IntN(len(n.inflight))
			n.inflight[i]()
			if rng.IntN(3) > 0 { // sometimes delivered twice
				n.inflight = slices.Delete(n.inflight, i, i+1)
			}
		}
	}
	// Late messages arrive in random order, then the network heals.
	rng.Shuffle(len(n.inflight), func(i, j int) { n.inflight[i], n.inflight[j] = n.inflight[j], n.inflight[i] })
	for _, f := range n.inflight {
		if rng.IntN(2) == 0 {
			f()
		}
	}
	for round := 0; n.syncAll() > 0; round++ {
		if round > 8 {
			t.Fatalf("seed %d: no convergence after %d rounds", seed, round)
		}
	}
	n.verify(seed)
	// A second sync after convergence moves nothing.
	n.moved = 0
	if n.syncAll() != 0 || n.moved != 0 {
		t.Fatalf("seed %d: second sync after convergence moved %d revisions", seed, n.moved)
	}
}

// verify checks that every replica holds the same revisions, leaves,
// winners and records, that nothing created or confirmed was lost, and
// that the incremental leaves and winner equal those recomputed from the
// full revision set.
func (n *simNet) verify(seed uint64) {
	t := n.t
	type snapshot struct {
		Hist    *History
		Current json.RawMessage
	}
	for _, cid := range n.ids {
		var first []byte
		for ri, r := range n.reps {
			h, err := r.e.History(testStudy, cid)
			if err != nil {
				if _, made := findAny(n.created, cid); !made {
					continue
				}
				t.Fatalf("seed %d replica %d: %v", seed, ri, err)
			}
			have := map[string]capture.Capture{}
			parentOf := map[string]bool{}
			for _, rv := range h.Revisions {
				have[rv.Revision.ID] = rv
				for _, p := range rv.Revision.Parents {
					parentOf[p] = true
				}
			}
			for id, c := range n.created {
				if c == cid {
					if _, ok := have[id]; !ok {
						t.Fatalf("seed %d replica %d: created revision %s lost", seed, ri, id)
					}
				}
			}
			for id, c := range n.confirmed {
				if c == cid {
					if _, ok := have[id]; !ok {
						t.Fatalf("seed %d replica %d: confirmed revision %s lost", seed, ri, id)
					}
				}
			}
			// Leaves and winner from scratch.
			var leaves []string
			var metas []leaf
			for id, rv := range have {
				if !parentOf[id] {
					leaves = append(leaves, id)
					metas = append(metas, leaf{id: id, depth: rv.Revision.Depth, stamp: rv.Revision.Stamp, device: rv.Revision.Device, deleted: rv.Revision.Deleted})
				}
			}
			slices.Sort(leaves)
			if !slices.Equal(leaves, h.Leaves) || metas[winner(metas)].id != h.Winner {
				t.Fatalf("seed %d replica %d: leaves %v winner %s; recomputed %v %s", seed, ri, h.Leaves, h.Winner, leaves, metas[winner(metas)].id)
			}
			// Depths from scratch; every revision reachable from a leaf.
			reach := map[string]bool{}
			var walk func(id string)
			walk = func(id string) {
				if reach[id] {
					return
				}
				reach[id] = true
				rv, ok := have[id]
				if !ok {
					t.Fatalf("seed %d replica %d: ancestor %s missing", seed, ri, id)
				}
				d := 1
				for _, p := range rv.Revision.Parents {
					walk(p)
					d = max(d, have[p].Revision.Depth+1)
				}
				if d != rv.Revision.Depth {
					t.Fatalf("seed %d: revision %s depth %d, recomputed %d", seed, id, rv.Revision.Depth, d)
				}
			}
			for _, l := range leaves {
				walk(l)
			}
			if len(reach) != len(have) {
				t.Fatalf("seed %d replica %d: %d revisions, %d reachable from leaves", seed, ri, len(have), len(reach))
			}
			// The stored record is the winner's body.
			cur, err := currentOf(r.e, cid)
			if err != nil {
				t.Fatal(err)
			}
			w := have[h.Winner]
			b1, _ := CanonicalBody(cur)
			b2, _ := CanonicalBody(&w)
			if !bytes.Equal(b1, b2) || cur.Revision.ID != h.Winner || cur.Revision.Conflict != (len(leaves) > 1) || cur.Revision.Deleted != w.Revision.Deleted {
				t.Fatalf("seed %d replica %d: stored record is not the winner", seed, ri)
			}
			js, _ := json.Marshal(snapshot{h, mustJSON(cur)})
			if first == nil {
				first = js
			} else if !bytes.Equal(first, js) {
				t.Fatalf("seed %d: replica %d differs from replica 0:\n%s\n%s", seed, ri, first, js)
			}
		}
	}
}

func findAny(m map[string]string, v string) (string, bool) {
	for k, x := range m {
		if x == v {
			return k, true
		}
	}
	return "", false
}

func mustJSON(v any) json.RawMessage {
	b, err := json.Marshal(v)
	if err != nil {
		panic(err)
	}
	return b
}

func currentOf(e *Engine, cid string) (*capture.Capture, error) {
	var c *capture.Capture
	err := e.b.view(func(t txn) error {
		var err error
		c, err = t.current(testStudy, cid)
		return err
	})
	return c, err
}

// TestSimulation runs seeded schedules of edits, concurrent edits, deletes
// racing edits, resolutions, and pushes and pulls that are cut short,
// duplicated, reordered, delayed or lost, across 3 or 4 in-memory
// replicas running the real merge code, then heals the network and checks
// convergence (see verify). -sync.schedules sets the count.
func TestSimulation(t *testing.T) {
	count := *simSchedules
	if testing.Short() {
		count = min(count, 1000)
	}
	for seed := uint64(1); seed <= uint64(count); seed++ {
		runSchedule(t, seed, func(i int) *simReplica {
			e, m := newMemEngine(fmt.Sprintf("r%d", i), testStudy)
			return &simReplica{e: e, feed: func() int { return len(m.feed) }}
		})
	}
	t.Logf("%d schedules converged", count)
}
