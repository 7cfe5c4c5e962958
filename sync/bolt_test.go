package sync

import (
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	stdsync "sync"
	"testing"

	"tagtally/capture"
	"tagtally/capture/storetest"
)

// openBolt opens a checked store (storetest) with the test study and an
// engine on it.
func openBolt(t testing.TB, o *Options) (*Engine, *capture.Store) {
	t.Helper()
	s := storetest.Open(t)
	if err := s.PutStudy(storetest.Study()); err != nil {
		t.Fatal(err)
	}
	e, err := Open(s, o)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		if err := e.Close(); err != nil {
			t.Error(err)
		}
	})
	return e, s
}

func feedLen(e *Engine) int {
	var n uint64
	_ = e.b.view(func(t txn) error {
		var err error
		n, err = t.lastSeq()
		return err
	})
	return int(n)
}

// A smaller number of the simulation's schedules on real bbolt stores.
func TestSimulationBolt(t *testing.T) {
	count := 40
	if testing.Short() {
		count = 10
	}
	for seed := uint64(1); seed <= uint64(count); seed++ {
		t.Run(fmt.Sprint(seed), func(t *testing.T) {
			runSchedule(t, seed, func(i int) *simReplica {
				e, _ := openBolt(t, nil)
				return &simReplica{e: e, feed: func() int { return feedLen(e) }}
			})
		})
	}
}

func TestBoltLocalEditsAndStore(t *testing.T) {
	e, s := openBolt(t, nil)
	c := body("", 1)
	c.StationID = "A1"
	rec, fs, err := e.Create(c)
	if err != nil {
		t.Fatal(err)
	}
	if rec.Occasion != 1 {
		t.Fatalf("occasion derived by the store's Prepare: got %d, want 1", rec.Occasion)
	}
	_ = fs
	got, err := s.GetCapture(testStudy, rec.ID)
	if err != nil || got.Revision.ID != rec.Revision.ID || got.Revision.Depth != 1 {
		t.Fatalf("store holds %+v, %v", got, err)
	}
	bad := body("", 2)
	bad.TagID = "not a tag"
	if _, _, err := e.Create(bad); err == nil || !strings.Contains(err.Error(), "tag series") {
		t.Fatalf("invalid create: %v", err)
	}
	upd := body(rec.ID, 3)
	upd.StationID = "A2"
	if _, _, err := e.Update(upd); err != nil {
		t.Fatal(err)
	}
	if _, err := e.Delete(testStudy, rec.ID); err != nil {
		t.Fatal(err)
	}
	got, _ = s.GetCapture(testStudy, rec.ID)
	if !got.Revision.Deleted || got.Revision.Depth != 3 {
		t.Fatalf("after delete: %+v", got.Revision)
	}
	h, err := e.History(testStudy, rec.ID)
	if err != nil || len(h.Revisions) != 3 {
		t.Fatalf("history: %v %v", h, err)
	}
	page, err := e.Pull(PullRequest{})
	if err != nil || len(page.Revisions) != 3 || page.More {
		t.Fatalf("pull: %d revisions, more %v, %v", len(page.Revisions), page.More, err)
	}
}

// Paging through the feed while another goroutine pushes never skips a
// revision.
func TestPullWhileWriting(t *testing.T) {
	e, _ := openBolt(t, nil)
	const n = 300
	var wg stdsync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		for i := 0; i < n; i += 10 {
			var revs []*capture.Capture
			for j := i; j < i+10; j++ {
				id := fmt.Sprintf("01890a5d-ac96-774b-bcce-%012x", j)
				revs = append(revs, phoneRev(t, body(id, j), nil, false, st(int64(1000+j), "p")))
			}
			if _, err := e.ApplyRemote(revs, "phone"); err != nil {
				t.Error(err)
				return
			}
		}
	}()
	seen := map[string]bool{}
	cursor := ""
	done := false
	for !done {
		page, err := e.Pull(PullRequest{Cursor: cursor, Limit: 7})
		if err != nil {
			t.Fatal(err)
		}
		for _, c := range wire(page.Revisions) {
			if seen[c.Revision.ID] {
				t.Fatalf("revision %s served twice", c.Revision.ID)
			}
			seen[c.Revision.ID] = true
		}
		cursor = page.Next
		if !page.More && len(seen) == n {
			done = true
		}
	}
	wg.Wait()
	if len(seen) != n {
		t.Fatalf("pulled %d of %d", len(seen), n)
	}
}

// The epoch survives a restart, and changes when the data file is put back
// from a backup, or the side file is lost.
func TestEpochAfterRestore(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "camp.db")
	open := func() (*capture.Store, *Engine) {
		s, err := capture.Open(path, capture.DefaultOptions)
		if err != nil {
			t.Fatal(err)
		}
		e, err := Open(s, nil)
		if err != nil {
			t.Fatal(err)
		}
		return s, e
	}
	closeBoth := func(s *capture.Store, e *Engine) {
		if err := e.Close(); err != nil {
			t.Fatal(err)
		}
		if err := s.Check(); err != nil {
			t.Fatal(err)
		}
		if err := s.Close(); err != nil {
			t.Fatal(err)
		}
	}
	push := func(e *Engine, from, to int) {
		var revs []*capture.Capture
		for j := from; j < to; j++ {
			revs = append(revs, phoneRev(t, body(fmt.Sprintf("01890a5d-ac96-774b-bcce-%012x", j), j), nil, false, st(int64(1000+j), "p")))
		}
		for _, r := range mustApply(t, e, "p", revs...) {
			if r.Status != StatusStored {
				t.Fatalf("%+v", r)
			}
		}
	}
	s, e := open()
	if err := s.PutStudy(storetest.Study()); err != nil {
		t.Fatal(err)
	}
	if e.EpochNote != "new data file" {
		t.Fatalf("note %q", e.EpochNote)
	}
	push(e, 0, 5)
	backup := filepath.Join(dir, "backup.db")
	if err := s.BackupToFile(backup); err != nil {
		t.Fatal(err)
	}
	push(e, 5, 10)
	epoch1 := e.Epoch()
	page, _ := e.Pull(PullRequest{})
	clientCursor := page.Next // a phone has read everything
	closeBoth(s, e)

	s, e = open() // plain restart
	if e.Epoch() != epoch1 {
		t.Fatalf("restart changed the epoch: %s -> %s (%s)", epoch1, e.Epoch(), e.EpochNote)
	}
	if p, _ := e.Pull(PullRequest{Cursor: clientCursor}); p.Reset || len(p.Revisions) != 0 {
		t.Fatalf("after restart the client's cursor should be current: reset %v, %d revisions", p.Reset, len(p.Revisions))
	}
	closeBoth(s, e)

	copyFile(t, backup, path) // restore the backup (5 revisions)
	s, e = open()
	if e.Epoch() == epoch1 || !strings.Contains(e.EpochNote, "restored") {
		t.Fatalf("restore not detected: epoch %s, note %q", e.Epoch(), e.EpochNote)
	}
	p, _ := e.Pull(PullRequest{Cursor: clientCursor})
	if !p.Reset || len(p.Revisions) != 5 {
		t.Fatalf("old cursor after restore: reset %v, %d revisions; want a full resync of 5", p.Reset, len(p.Revisions))
	}
	// The client pushes everything it holds again: the 5 are already
	// there, the 5 lost by the restore come back.
	var all []*capture.Capture
	for j := 0; j < 10; j++ {
		all = append(all, phoneRev(t, body(fmt.Sprintf("01890a5d-ac96-774b-bcce-%012x", j), j), nil, false, st(int64(1000+j), "p")))
	}
	stored := 0
	for _, r := range mustApply(t, e, "p", all...) {
		if r.Status == StatusStored {
			stored++
		}
	}
	if stored != 5 {
		t.Fatalf("re-push after restore stored %d, want 5", stored)
	}
	epoch2 := e.Epoch()
	closeBoth(s, e)

	if err := os.Remove(path + ".feedmark"); err != nil {
		t.Fatal(err)
	}
	s, e = open()
	if e.Epoch() == epoch2 {
		t.Fatal("lost side file must give a new epoch")
	}
	closeBoth(s, e)
}

func copyFile(t *testing.T, from, to string) {
	t.Helper()
	src, err := os.Open(from)
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	dst, err := os.Create(to)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := io.Copy(dst, src); err != nil {
		t.Fatal(err)
	}
	if err := dst.Close(); err != nil {
		t.Fatal(err)
	}
}

// Pushed JSON with unknown members or a wrong ID is rejected, the rest kept.
func TestPushDecodeAndApply(t *testing.T) {
	e, _ := openBolt(t, nil)
	good := phoneRev(t, body("01890a5d-ac96-774b-bcce-b302099a8057", 1), nil, false, st(1000, "p"))
	gj, _ := json.Marshal(good)
	extra := strings.Replace(string(gj), `"id":`, `"colour":"red","id":`, 1)
	req := fmt.Sprintf(`{"source":"phone-1","revisions":[%s, 42, %s]}`, gj, extra)
	b, err := DecodePush(strings.NewReader(req))
	if err != nil {
		t.Fatal(err)
	}
	rep, err := e.Push(b)
	if err != nil {
		t.Fatal(err)
	}
	if rep.Results[0].Status != StatusStored || rep.Results[1].Status != StatusRejected || rep.Results[2].Status != StatusAlreadyHad {
		// The unknown member is dropped by decoding; the rest hashes to
		// the stored revision, so it is "already had".
		t.Fatalf("%+v", rep.Results)
	}
	for _, body := range []string{"", "[]", `{"revisions":[]} x`, `{"revisions":` + strings.Repeat("[", 10) + `}`} {
		if _, err := DecodePush(strings.NewReader(body)); err == nil {
			t.Errorf("body %q accepted", body)
		}
	}
	many := `{"revisions":[` + strings.TrimSuffix(strings.Repeat("{},", MaxPushRevisions+1), ",") + `]}`
	if _, err := DecodePush(strings.NewReader(many)); err == nil || !strings.Contains(err.Error(), ErrTooLarge.Error()) {
		t.Errorf("too many revisions: %v", err)
	}
	if rec, _ := e.Source("phone-1"); rec.Stored != 1 || rec.AlreadyHad != 1 || rec.Rejected != 1 {
		t.Errorf("source record %+v", rec)
	}
}

// Records written straight to the capture store (demo data, imports,
// direct edits) are versioned by Adopt, once.
func TestAdoptUnversionedRecords(t *testing.T) {
	e, s := openBolt(t, nil)
	mk := func(n int) capture.Capture {
		c := *body(fmt.Sprintf("01890a5d-ac96-774b-bcce-%012x", n), n)
		c.StationID = "A1"
		return c
	}
	versioned, _, err := e.Create(ptr(mk(1)))
	if err != nil {
		t.Fatal(err)
	}
	if _, err := s.PutCaptures([]capture.Capture{mk(2), mk(3)}); err != nil {
		t.Fatal(err)
	}
	n, err := e.Adopt()
	if err != nil || n != 2 {
		t.Fatalf("adopt: %d %v; want 2 first revisions", n, err)
	}
	// A direct edit and a direct delete of versioned records.
	edited := mk(1)
	edited.Notes = "edited without sync"
	if _, _, err := s.UpdateCapture(&edited); err != nil {
		t.Fatal(err)
	}
	if err := s.DeleteCapture(testStudy, mk(2).ID); err != nil {
		t.Fatal(err)
	}
	if n, err = e.Adopt(); err != nil || n != 2 {
		t.Fatalf("adopt after direct writes: %d %v; want 2 child revisions", n, err)
	}
	if n, err = e.Adopt(); err != nil || n != 0 {
		t.Fatalf("second adopt: %d %v; want 0", n, err)
	}
	h, err := e.History(testStudy, versioned.ID)
	if err != nil || len(h.Revisions) != 2 || h.Conflict || h.Revisions[1].Notes != "edited without sync" || h.Revisions[1].Revision.Parents[0] != versioned.Revision.ID {
		t.Fatalf("history after adoption: %+v %v", h, err)
	}
	h, _ = e.History(testStudy, mk(2).ID)
	if len(h.Revisions) != 2 || !h.Revisions[1].Revision.Deleted {
		t.Fatalf("direct delete not adopted as a tombstone: %+v", h)
	}
	if page, _ := e.Pull(PullRequest{}); len(page.Revisions) != 5 {
		t.Fatalf("feed holds %d revisions, want 5", len(page.Revisions))
	}
}

func ptr[T any](v T) *T { return &v }
