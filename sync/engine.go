package sync

import (
	"crypto/rand"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"slices"
	"strconv"
	"strings"
	"time"

	"github.com/google/uuid"

	"tagtally/capture"
)

// Options configure an Engine. The zero value is usable.
type Options struct {
	// Device names this replica in the stamps of its local edits; empty
	// means the replica ID (random, kept in the data file).
	Device string
	// MaxAhead bounds how far the clock follows a received stamp into the
	// future (DefaultMaxAhead when 0).
	MaxAhead time.Duration
	// Now reads the physical clock (time.Now when nil); tests set it.
	Now func() time.Time
	// FeedMarkPath is the side file that detects a data file restored from
	// a backup (see Open); empty means the data file's path + ".feedmark".
	FeedMarkPath string
	// Batch makes pushes use the store's Batch (one commit shared by
	// concurrent pushes) instead of Update. Faster with several phones
	// pushing at once, slower with one (PERFORMANCE.md).
	Batch bool
}

// Engine merges revisions into one replica: local edits, pushes from
// phones and peers, pulls by them, histories and resolutions. It is safe
// for concurrent use.
type Engine struct {
	b       backend
	clock   *Clock
	replica string
	epoch   string
	batch   bool
	// EpochNote says why the epoch is what it is ("new data file", "data
	// file restored or replaced: ..."), for the log.
	EpochNote string
	mark      *feedMark
}

type backend interface {
	studyIDs() ([]string, error)
	update(fn func(txn) error) error
	batch(fn func(txn) error) error
	view(fn func(txn) error) error
}

// Open starts sync on a capture store. It reads (or creates) the replica
// ID and the change-feed epoch kept in the store.
//
// Restored backups. A feed cursor (epoch, seq) held by a client is only
// meaningful while the file's feed is a continuation of the one the client
// read. A data file copied back from a backup has an older feed: later
// sequence numbers would be reused for different revisions, and revisions
// that were acknowledged after the backup are gone. To notice, the engine
// keeps a side file next to the data file (FeedMarkPath) holding the epoch
// and the highest feed sequence committed so far, rewritten in place after
// every commit that adds to the feed (to the page cache: no fsync per push;
// it is synced at Close). At Open a new epoch is made when the data file has
// no epoch, the side file is missing or unreadable, names another epoch, or
// records a higher sequence than the file holds: in every such case the
// file is not known to continue the feed clients have seen. Clients seeing
// a new epoch pull from the start and push everything they hold, which is
// safe because re-applying a revision changes nothing. A false alarm (the
// side file lost) costs one full resync, never data.
func Open(s *capture.Store, o *Options) (*Engine, error) {
	if o == nil {
		o = &Options{}
	}
	path := o.FeedMarkPath
	if path == "" {
		path = s.Path() + ".feedmark"
	}
	return newEngine(boltBackend{s}, path, *o)
}

func newEngine(b backend, markPath string, o Options) (*Engine, error) {
	e := &Engine{b: b, batch: o.Batch}
	var last uint64
	var mark feedMarkData
	var markErr error = errors.New("no side file")
	if markPath != "" {
		mark, markErr = readFeedMark(markPath)
	}
	err := b.update(func(t txn) error {
		r, err := t.getMeta("replica")
		if err != nil {
			return err
		}
		if r == nil {
			r = []byte(randomHex(8))
			if err := t.putMeta("replica", r); err != nil {
				return err
			}
		}
		e.replica = string(r)
		ep, err := t.getMeta("epoch")
		if err != nil {
			return err
		}
		if last, err = t.lastSeq(); err != nil {
			return err
		}
		switch {
		case ep == nil:
			e.EpochNote = "new data file"
		case markPath == "":
			e.epoch = string(ep)
			return nil
		case markErr != nil:
			e.EpochNote = fmt.Sprintf("data file restored or moved (feed mark: %v): clients resync in full", markErr)
		case mark.epoch != string(ep):
			e.EpochNote = fmt.Sprintf("data file restored or replaced (its epoch %s, last run's %s): clients resync in full", ep, mark.epoch)
		case last < mark.seq:
			e.EpochNote = fmt.Sprintf("data file restored from a backup (feed at %d, last run reached %d): clients resync in full", last, mark.seq)
		default:
			e.epoch = string(ep)
			e.EpochNote = "continuing"
			return nil
		}
		e.epoch = randomHex(8)
		return t.putMeta("epoch", []byte(e.epoch))
	})
	if err != nil {
		return nil, fmt.Errorf("sync: open: %w", err)
	}
	if markPath != "" {
		if e.mark, err = openFeedMark(markPath, e.epoch, last); err != nil {
			return nil, fmt.Errorf("sync: open: %w", err)
		}
	}
	device := o.Device
	if device == "" {
		device = e.replica
	}
	e.clock = NewClock(device, o.Now, o.MaxAhead)
	// Start the clock at the newest stored stamp, so stamps keep increasing
	// across a restart even if the clock had followed a peer's ahead.
	if last > 0 {
		err = b.view(func(t txn) error {
			return t.feedAfter(last-1, func(_ uint64, fe feedEntry) (bool, error) {
				val, ok, err := t.revision(fe.captureID, fe.revID)
				if err != nil || !ok {
					return false, err
				}
				h, err := revHeader(val)
				if err != nil {
					return false, err
				}
				if st, err := ParseStamp(h.stamp); err == nil {
					e.clock.Observe(st)
				}
				return false, nil
			})
		})
		if err != nil {
			return nil, fmt.Errorf("sync: open: %w", err)
		}
	}
	return e, nil
}

// Close syncs the feed mark to disk. It does not close the store.
func (e *Engine) Close() error {
	if e.mark == nil {
		return nil
	}
	return e.mark.close()
}

// Replica is this replica's ID, kept in the data file.
func (e *Engine) Replica() string { return e.replica }

// Epoch is the change feed's epoch (see Open).
func (e *Engine) Epoch() string { return e.epoch }

// Clock is the replica's hybrid logical clock.
func (e *Engine) Clock() *Clock { return e.clock }

func randomHex(n int) string {
	b := make([]byte, n)
	if _, err := rand.Read(b); err != nil {
		panic("sync: no randomness: " + err.Error()) // crypto/rand never fails on supported systems
	}
	return hex.EncodeToString(b)
}

// noteSeq records a committed feed position in the feed mark.
func (e *Engine) noteSeq(seq uint64) {
	if e.mark != nil {
		e.mark.advance(seq)
	}
}

// ---- remote revisions ----

// ApplyRemote merges revisions pushed or pulled from source (a device or
// replica ID; "" for none) in one transaction and returns a result per
// revision, in order, after the commit. Revisions may come in any order
// and any number of times; a bad one is rejected alone. The revisions are
// modified (IDs filled in, Depth set). The error is for storage failures
// only, in which case nothing was stored.
func (e *Engine) ApplyRemote(revs []*capture.Capture, source string) ([]Result, error) {
	res, err := e.apply(revs, source, e.batch, nil)
	if err == nil {
		fault("after-push-commit")
	}
	return res, err
}

// apply checks revs, then merges them and runs extra (a checkpoint write)
// in one transaction.
func (e *Engine) apply(revs []*capture.Capture, source string, useBatch bool, extra func(t txn, res []Result) error) ([]Result, error) {
	pre := make([]Result, len(revs))
	bodies := make([][]byte, len(revs))
	check := func(i int) {
		c := revs[i]
		if c == nil {
			pre[i] = Result{Status: StatusRejected, Reason: ErrBadRevision.Error() + ": empty"}
			return
		}
		body, err := checkRevision(c)
		if err != nil {
			pre[i] = Result{CaptureID: c.ID, Revision: c.Revision.ID, Status: StatusRejected, Reason: err.Error()}
			return
		}
		bodies[i] = body
	}
	// checkRevision fills in c's ID: on all cores only when no revision
	// is given twice (the same pointer), else one after another.
	if distinct(revs) {
		parallel(len(revs), check)
	} else {
		for i := range revs {
			check(i)
		}
	}
	for i, c := range revs {
		if bodies[i] == nil {
			continue
		}
		st, _ := ParseStamp(c.Revision.Stamp) // checked above
		if ahead := e.clock.Observe(st); ahead > 0 {
			pre[i].Warning = fmt.Sprintf("stamp is %s ahead of this server's clock: kept as given for ordering, but the server clock did not follow it; check the device's clock", ahead.Round(time.Minute))
		}
	}
	var out []Result
	var last uint64
	run := e.b.update
	if useBatch {
		run = e.b.batch
	}
	err := run(func(t txn) error {
		res := slices.Clone(pre) // fn may run twice under Batch
		if err := applyBatch(t, revs, bodies, source, res); err != nil {
			return err
		}
		for i := range res {
			if bodies[i] != nil {
				res[i].Warning = pre[i].Warning
			}
		}
		if source != "" {
			if err := noteSource(t, source, res); err != nil {
				return err
			}
		}
		if extra != nil {
			if err := extra(t, res); err != nil {
				return err
			}
		}
		var err error
		last, err = t.lastSeq()
		out = res
		return err
	})
	if err != nil {
		return nil, fmt.Errorf("sync: apply: %w", err)
	}
	e.noteSeq(last)
	return out, nil
}

// distinct reports whether no revision appears twice in revs (nil aside).
func distinct(revs []*capture.Capture) bool {
	seen := make(map[*capture.Capture]bool, len(revs))
	for _, c := range revs {
		if c != nil && seen[c] {
			return false
		}
		seen[c] = true
	}
	return true
}

// SourceRecord is the receiving end's checkpoint for one sender, written
// in the same transaction as the revisions it counts.
type SourceRecord struct {
	LastPush   time.Time `json:"last_push"`
	Stored     int       `json:"stored"`
	AlreadyHad int       `json:"already_had"`
	Rejected   int       `json:"rejected"`
}

func noteSource(t txn, source string, res []Result) error {
	key := "source:" + source
	var r SourceRecord
	if v, err := t.getMeta(key); err != nil {
		return err
	} else if v != nil {
		_ = json.Unmarshal(v, &r) // an unreadable record restarts its counts
	}
	r.LastPush = time.Now().UTC()
	for _, x := range res {
		switch x.Status {
		case StatusStored:
			r.Stored++
		case StatusAlreadyHad:
			r.AlreadyHad++
		default:
			r.Rejected++
		}
	}
	v, err := json.Marshal(r)
	if err != nil {
		return err
	}
	return t.putMeta(key, v)
}

// Source returns what this replica has received from a sender.
func (e *Engine) Source(source string) (SourceRecord, error) {
	var r SourceRecord
	err := e.b.view(func(t txn) error {
		v, err := t.getMeta("source:" + source)
		if err != nil || v == nil {
			return err
		}
		return json.Unmarshal(v, &r)
	})
	return r, err
}

// ---- local edits ----

// Create stores a new capture record as its first revision, validating it
// and deriving its occasion as the capture store does. An empty ID gets a
// UUID v7. Errors: capture.ErrConflict (the ID exists), capture.ErrNotFound
// (no such study), *capture.ValidationError.
func (e *Engine) Create(c *capture.Capture) (*capture.Capture, capture.Findings, error) {
	rec := cloneCapture(c)
	if rec.ID == "" {
		u, err := uuid.NewV7()
		if err != nil {
			return nil, nil, fmt.Errorf("sync: new capture ID: %w", err)
		}
		rec.ID = u.String()
	}
	return e.local(func(t txn) (*capture.Capture, []string, capture.Findings, error) {
		rec.Revision = capture.Revision{}
		fs, err := t.prepare(rec)
		if err != nil {
			return nil, nil, nil, err
		}
		exists := fmt.Errorf("capture %s: %w: a record with this ID exists", rec.ID, capture.ErrConflict)
		if _, ok, err := t.record(rec.ID); err != nil || ok {
			if err == nil {
				err = exists
			}
			return nil, nil, nil, err
		}
		// A record written to the capture store without sync and not yet
		// adopted is there too.
		if _, err := t.current(rec.StudyID, rec.ID); !errors.Is(err, capture.ErrNotFound) {
			if err == nil {
				err = exists
			}
			return nil, nil, nil, err
		}
		return rec, nil, fs, nil
	})
}

// Update stores an edit of an existing record as a new revision. Its
// parent is c.Revision.ID, the revision the editor started from, or the
// current winner when that is empty. An edit of an older revision is kept
// and makes the record a conflict for the coordinator to resolve; nothing
// is overwritten. An edit cannot start from a deleted revision (undoing a
// delete is a resolution, see Resolve). Errors: capture.ErrNotFound,
// capture.ErrConflict (the base revision, or the winner when none was
// named, is deleted), ErrMissingParent (the base revision is not stored
// here), *capture.ValidationError.
func (e *Engine) Update(c *capture.Capture) (*capture.Capture, capture.Findings, error) {
	rec := cloneCapture(c)
	base := c.Revision.ID
	return e.local(func(t txn) (*capture.Capture, []string, capture.Findings, error) {
		rs, err := e.recordOf(t, rec.StudyID, rec.ID)
		if err != nil {
			return nil, nil, nil, err
		}
		w := rs.leaves[winner(rs.leaves)]
		if base == "" {
			if w.deleted {
				return nil, nil, nil, fmt.Errorf("capture %s: %w: it is deleted", rec.ID, capture.ErrConflict)
			}
			base = w.id
		} else if val, ok, err := t.revision(rec.ID, base); err != nil || !ok {
			if err == nil {
				err = fmt.Errorf("capture %s: base revision %q: %w", rec.ID, base, ErrMissingParent)
			}
			return nil, nil, nil, err
		} else if h, err := revHeader(val); err != nil || h.deleted {
			if err == nil {
				err = fmt.Errorf("capture %s: %w: revision %s is a deletion", rec.ID, capture.ErrConflict, base)
			}
			return nil, nil, nil, err
		}
		rec.Revision = capture.Revision{}
		fs, err := t.prepare(rec)
		return rec, []string{base}, fs, err
	})
}

// Delete stores a tombstone revision of the record's current winner.
// Deleting a record whose only leaf is deleted does nothing. A record in
// conflict is not deleted (capture.ErrConflict): a tombstone of one leaf
// would leave the others showing, and deleting them all would settle the
// conflict unseen; Resolve with a deleted body does that on purpose.
func (e *Engine) Delete(studyID, id string) (*capture.Capture, error) {
	c, _, err := e.local(func(t txn) (*capture.Capture, []string, capture.Findings, error) {
		rs, err := e.recordOf(t, studyID, id)
		if err != nil {
			return nil, nil, nil, err
		}
		if len(rs.leaves) > 1 {
			return nil, nil, nil, fmt.Errorf("capture %s: %w: it is in conflict (%d versions); resolve it, as a deletion if need be", id, capture.ErrConflict, len(rs.leaves))
		}
		w := rs.leaves[winner(rs.leaves)]
		body, err := e.revisionBody(t, id, w.id)
		if err != nil {
			return nil, nil, nil, err
		}
		if w.deleted && len(rs.leaves) == 1 {
			body.Revision.ID = w.id // unchanged: merge answers already had
			return body, body.Revision.Parents, nil, nil
		}
		body.Revision = capture.Revision{Deleted: true}
		return body, []string{w.id}, nil, nil
	})
	return c, err
}

// Resolve ends a conflict: it stores a revision whose parents are all the
// record's current leaves, so the record has one leaf again. c is the
// chosen body (validated like an edit; c.Revision.Deleted resolves to a
// deletion); nil keeps the current winner's body. leaves, if not empty,
// are the leaves the coordinator looked at: if the record's leaves are no
// longer exactly those, nothing is stored and ErrStaleLeaves is returned.
func (e *Engine) Resolve(studyID, id string, c *capture.Capture, leaves []string) (*capture.Capture, capture.Findings, error) {
	return e.local(func(t txn) (*capture.Capture, []string, capture.Findings, error) {
		rs, err := e.recordOf(t, studyID, id)
		if err != nil {
			return nil, nil, nil, err
		}
		ids := make([]string, len(rs.leaves))
		for i, l := range rs.leaves {
			ids[i] = l.id
		}
		slices.Sort(ids)
		if len(leaves) > 0 {
			want := slices.Clone(leaves)
			slices.Sort(want)
			want = slices.Compact(want)
			if !slices.Equal(ids, want) {
				return nil, nil, nil, fmt.Errorf("capture %s: %w: its leaves are %s", id, ErrStaleLeaves, strings.Join(ids, ", "))
			}
		}
		var rec *capture.Capture
		var fs capture.Findings
		if c == nil {
			if rec, err = e.revisionBody(t, id, rs.leaves[winner(rs.leaves)].id); err != nil {
				return nil, nil, nil, err
			}
			deleted := rec.Revision.Deleted
			rec.Revision = capture.Revision{Deleted: deleted}
		} else {
			rec = cloneCapture(c)
			rec.ID, rec.StudyID = id, studyID
			deleted := rec.Revision.Deleted
			rec.Revision = capture.Revision{}
			if !deleted {
				if fs, err = t.prepare(rec); err != nil {
					return nil, nil, nil, err
				}
			}
			rec.Revision.Deleted = deleted
		}
		if len(ids) == 1 && len(leaves) == 0 && c == nil {
			return nil, nil, nil, fmt.Errorf("capture %s: %w: it has a single leaf, nothing to resolve", id, capture.ErrConflict)
		}
		return rec, ids, fs, nil
	})
}

// LocalEdit stores a revision made on this replica with the given parents
// and deleted flag, unvalidated (for tools and tests that build revisions
// themselves; the HTTP API uses Create, Update, Delete and Resolve). The
// parents must be stored here.
func (e *Engine) LocalEdit(c *capture.Capture, parents []string, deleted bool) (*capture.Capture, error) {
	rec := cloneCapture(c)
	out, _, err := e.local(func(t txn) (*capture.Capture, []string, capture.Findings, error) {
		rec.Revision = capture.Revision{Deleted: deleted}
		return rec, parents, nil, nil
	})
	return out, err
}

// local runs build in a write transaction, then stamps, checks and merges
// the revision it returns, all in that transaction.
func (e *Engine) local(build func(t txn) (*capture.Capture, []string, capture.Findings, error)) (*capture.Capture, capture.Findings, error) {
	var out *capture.Capture
	var fs capture.Findings
	var last uint64
	err := e.b.update(func(t txn) error {
		rec, parents, f, err := build(t)
		if err != nil {
			return err
		}
		fs = f
		given := rec.Revision.ID
		rec.Revision = capture.Revision{
			ID: given, Parents: slices.Clone(parents), Deleted: rec.Revision.Deleted,
			Stamp: e.clock.Now().String(), Device: e.clock.device,
		}
		body, err := checkRevision(rec)
		if err != nil {
			return err
		}
		res, err := merge(t, rec, body, "")
		if err != nil {
			return err
		}
		if res.Status == StatusRejected {
			if res.Retry {
				return fmt.Errorf("capture %s: %w", rec.ID, ErrMissingParent)
			}
			return fmt.Errorf("capture %s: %s", rec.ID, res.Reason)
		}
		rec.Revision.Conflict = res.Conflict
		if res.Status == StatusAlreadyHad {
			// The same edit was made before: report the stored revision.
			val, _, err := t.revision(rec.ID, rec.Revision.ID)
			if err != nil {
				return err
			}
			if rec, err = decodeRevision(val); err != nil {
				return err
			}
			rec.Revision.Conflict = res.Conflict
		}
		out = rec
		last, err = t.lastSeq()
		return err
	})
	if err != nil {
		return nil, nil, fmt.Errorf("sync: %w", err)
	}
	e.noteSeq(last)
	return out, fs, nil
}

func (e *Engine) recordOf(t txn, studyID, id string) (recordState, error) {
	rs, ok, err := t.record(id)
	if err != nil {
		return rs, err
	}
	if !ok || rs.study != studyID || len(rs.leaves) == 0 {
		return rs, fmt.Errorf("capture %s in study %q: %w", id, studyID, capture.ErrNotFound)
	}
	return rs, nil
}

func (e *Engine) revisionBody(t txn, id, rev string) (*capture.Capture, error) {
	val, ok, err := t.revision(id, rev)
	if err != nil {
		return nil, err
	}
	if !ok {
		return nil, fmt.Errorf("capture %s revision %s: %w", id, rev, errCorrupt)
	}
	return decodeRevision(val)
}

// ---- records written without sync ----

// Adopt versions records that reached the capture store without going
// through sync (demo data, imports, files from before sync, direct store
// edits): a record sync does not know gets a first revision of its
// current body; a record whose body or deleted flag no longer matches the
// revision it names gets a child revision of that revision (or of the
// winner). Until adopted such records are not in the change feed, so
// SyncPeer calls Adopt first; the server calls it when sync starts. It
// returns the number of revisions made. Re-running it finds nothing.
func (e *Engine) Adopt() (int, error) {
	type adoption struct {
		c      *capture.Capture
		parent string
	}
	var todo []adoption
	studies, err := e.b.studyIDs()
	if err != nil {
		return 0, fmt.Errorf("sync: adopt: %w", err)
	}
	err = e.b.view(func(t txn) error {
		for _, sid := range studies {
			if err := t.forEachCapture(sid, func(c *capture.Capture) error {
				rs, ok, err := t.record(c.ID)
				if err != nil {
					return err
				}
				if !ok {
					todo = append(todo, adoption{c: c})
					return nil
				}
				base := c.Revision.ID
				val, ok, err := t.revision(c.ID, base)
				if err != nil {
					return err
				}
				if !ok {
					base = rs.leaves[winner(rs.leaves)].id
					if val, _, err = t.revision(c.ID, base); err != nil {
						return err
					}
				}
				r, stored, err := decodeStored(val)
				if err != nil {
					return fmt.Errorf("capture %s: %w", c.ID, err)
				}
				body, err := CanonicalBody(c)
				if err != nil {
					return fmt.Errorf("capture %s: %w", c.ID, err)
				}
				if r.ID != c.Revision.ID || r.Deleted != c.Revision.Deleted || string(body) != string(stored) {
					todo = append(todo, adoption{c: c, parent: base})
				}
				return nil
			}); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		return 0, fmt.Errorf("sync: adopt: %w", err)
	}
	made := 0
	for len(todo) > 0 {
		n := min(len(todo), 500)
		chunk := todo[:n]
		todo = todo[n:]
		var last uint64
		err := e.b.update(func(t txn) error {
			for _, a := range chunk {
				rec := cloneCapture(a.c)
				var parents []string
				if a.parent != "" {
					parents = []string{a.parent}
				}
				rec.Revision = capture.Revision{Parents: parents, Deleted: a.c.Revision.Deleted, Stamp: e.clock.Now().String(), Device: e.clock.device}
				body, err := checkRevision(rec)
				if err != nil {
					return fmt.Errorf("capture %s: %w", rec.ID, err)
				}
				res, err := merge(t, rec, body, "")
				if err != nil {
					return err
				}
				if res.Status == StatusRejected {
					return fmt.Errorf("capture %s: %s", rec.ID, res.Reason)
				}
				if res.Status == StatusStored {
					made++
				}
			}
			var err error
			last, err = t.lastSeq()
			return err
		})
		if err != nil {
			return made, fmt.Errorf("sync: adopt: %w", err)
		}
		e.noteSeq(last)
	}
	return made, nil
}

// ---- history ----

// History is every revision of one record ever accepted here.
type History struct {
	CaptureID string   `json:"capture_id"`
	StudyID   string   `json:"study_id"`
	Winner    string   `json:"winner"`
	Leaves    []string `json:"leaves"`
	Conflict  bool     `json:"conflict"`
	// Revisions oldest first: by Depth, then stamp, then ID.
	Revisions []capture.Capture `json:"revisions"`
}

// History returns a record's revisions and leaves; capture.ErrNotFound if
// the record is not in that study.
func (e *Engine) History(studyID, id string) (*History, error) {
	var h *History
	err := e.b.view(func(t txn) error {
		rs, err := e.recordOf(t, studyID, id)
		if err != nil {
			return err
		}
		h = &History{CaptureID: id, StudyID: studyID, Winner: rs.leaves[winner(rs.leaves)].id, Conflict: len(rs.leaves) > 1}
		for _, l := range rs.leaves {
			h.Leaves = append(h.Leaves, l.id)
		}
		slices.Sort(h.Leaves)
		return t.forEachRevision(id, func(val []byte) error {
			c, err := decodeRevision(val)
			if err != nil {
				return err
			}
			h.Revisions = append(h.Revisions, *c)
			return nil
		})
	})
	if err != nil {
		return nil, fmt.Errorf("sync: history: %w", err)
	}
	slices.SortFunc(h.Revisions, func(a, b capture.Capture) int {
		if a.Revision.Depth != b.Revision.Depth {
			return a.Revision.Depth - b.Revision.Depth
		}
		if c := strings.Compare(a.Revision.Stamp, b.Revision.Stamp); c != 0 {
			return c
		}
		return strings.Compare(a.Revision.ID, b.Revision.ID)
	})
	return h, nil
}

// ---- pull ----

// Pull limits.
const (
	DefaultPullLimit = 500
	MaxPullLimit     = 5000
	// maxScanFactor bounds the feed entries one page looks at when a filter
	// leaves most of them out, so one request does bounded work; the page
	// then ends early with More set.
	maxScanFactor = 20
)

// PullRequest asks for the revisions stored after a cursor.
type PullRequest struct {
	// Cursor is the Next of the previous page; "" starts at the beginning.
	Cursor string
	// Study keeps only that study's records; "" keeps all.
	Study string
	// Studies, when not nil, keeps only these studies' records (the
	// puller's access scope; scope.go).
	Studies []string
	// SkipSource leaves out revisions that came from this sender (the
	// puller itself: it has them). The cursor still moves past them.
	SkipSource string
	Limit      int
}

// PullPage is one page of the change feed.
type PullPage struct {
	Replica string `json:"replica"`
	Epoch   string `json:"epoch"`
	// Reset: the cursor was from another epoch (or empty) and this page
	// starts at the beginning of the feed. A client seeing a new epoch
	// should also push everything it holds again.
	Reset bool `json:"reset,omitempty"`
	// Revisions in feed order, each a capture with its Revision filled.
	Revisions []json.RawMessage `json:"revisions"`
	Next      string            `json:"next"`
	More      bool              `json:"more"`
}

// FormatCursor makes the cursor for a feed position.
func FormatCursor(epoch string, seq uint64) string {
	return epoch + "-" + strconv.FormatUint(seq, 10)
}

// ParseCursor splits a cursor into epoch and sequence.
func ParseCursor(s string) (epoch string, seq uint64, err error) {
	ep, n, ok := strings.Cut(s, "-")
	if !ok || ep == "" || len(ep) > 64 {
		return "", 0, fmt.Errorf("%w: %q", ErrBadCursor, s)
	}
	seq, err = strconv.ParseUint(n, 10, 64)
	if err != nil {
		return "", 0, fmt.Errorf("%w: %q", ErrBadCursor, s)
	}
	return ep, seq, nil
}

// Pull returns the revisions stored after req.Cursor, oldest first. A
// page is read in one read transaction, a consistent snapshot; feed
// sequence numbers are taken in the transaction that stores the revision
// and transactions commit one after another, so any revision committed
// later has a higher sequence than Next: paging never skips a change.
func (e *Engine) Pull(req PullRequest) (*PullPage, error) {
	limit := req.Limit
	if limit <= 0 {
		limit = DefaultPullLimit
	}
	limit = min(limit, MaxPullLimit)
	page := &PullPage{Replica: e.replica, Epoch: e.epoch, Revisions: []json.RawMessage{}}
	var after uint64
	if req.Cursor == "" {
		page.Reset = true
	} else {
		ep, seq, err := ParseCursor(req.Cursor)
		if err != nil {
			return nil, fmt.Errorf("sync: pull: %w", err)
		}
		if ep == e.epoch {
			after = seq
		} else {
			page.Reset = true
		}
	}
	next := after
	err := e.b.view(func(t txn) error {
		last, err := t.lastSeq()
		if err != nil {
			return err
		}
		scanned := 0
		err = t.feedAfter(after, func(seq uint64, fe feedEntry) (bool, error) {
			if len(page.Revisions) == limit || scanned == limit*maxScanFactor {
				return false, nil
			}
			scanned++
			next = seq
			if req.SkipSource != "" && fe.source == req.SkipSource {
				return true, nil
			}
			if req.filtered() {
				rs, ok, err := t.record(fe.captureID)
				if err != nil {
					return false, err
				}
				if !ok || !req.keeps(rs.study) {
					return true, nil
				}
			}
			val, ok, err := t.revision(fe.captureID, fe.revID)
			if err != nil {
				return false, err
			}
			if !ok {
				return false, fmt.Errorf("feed entry %d names revision %s of %s: %w", seq, fe.revID, fe.captureID, errCorrupt)
			}
			js, err := wireJSON(val)
			if err != nil {
				return false, err
			}
			page.Revisions = append(page.Revisions, js)
			return true, nil
		})
		page.More = next < last
		return err
	})
	if err != nil {
		return nil, fmt.Errorf("sync: pull: %w", err)
	}
	page.Next = FormatCursor(e.epoch, next)
	return page, nil
}
