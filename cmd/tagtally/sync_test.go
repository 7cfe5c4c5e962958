package main

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"log/slog"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"github.com/google/uuid"

	"tagtally/capture"
	"tagtally/capture/storetest"
	tsync "tagtally/sync"
)

// serveWithEnv starts `tagtally serve` with extra environment variables.
func serveWithEnv(t *testing.T, bin, data string, port int, env ...string) *exec.Cmd {
	t.Helper()
	cmd, _ := startServeProcess(t, bin, data, port, env)
	return cmd
}

func stopServe(t *testing.T, cmd *exec.Cmd) {
	t.Helper()
	cmd.Process.Signal(syscall.SIGTERM)
	if err := cmd.Wait(); err != nil {
		t.Fatalf("serve did not stop cleanly: %v", err)
	}
}

func postJSON(t *testing.T, url string, v any, out any) int {
	t.Helper()
	body, _ := json.Marshal(v)
	resp, err := http.Post(url, "application/json", bytes.NewReader(body))
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	if out != nil && resp.StatusCode/100 == 2 {
		if err := json.NewDecoder(resp.Body).Decode(out); err != nil {
			t.Fatal(err)
		}
	}
	return resp.StatusCode
}

func createStudy(t *testing.T, base string) {
	t.Helper()
	if code := postJSON(t, base+"/api/v1/studies", storetest.Study(), nil); code != http.StatusCreated {
		t.Fatalf("create study: %d", code)
	}
}

// phone makes revisions the way the phone app does.
type phone struct {
	name  string
	clock *tsync.Clock
}

func newPhone(name string) *phone { return &phone{name, tsync.NewClock(name, nil, 0)} }

func (p *phone) rev(t testing.TB, id string, n int, parents []string, deleted bool) *capture.Capture {
	c := &capture.Capture{
		ID: id, StudyID: storetest.Study().ID, TagID: fmt.Sprintf("BF-%04d", n%10000), Event: capture.EventNewMark,
		StationID: "A1", Species: "bank vole", CapturedAt: time.Date(2025, 6, 2, 22, 0, 0, 0, time.UTC), Notes: fmt.Sprintf("edit %d by %s", n, p.name),
	}
	id2, err := tsync.RevisionID(c, parents, deleted)
	if err != nil {
		t.Fatal(err)
	}
	s := p.clock.Now()
	c.Revision = capture.Revision{ID: id2, Parents: parents, Deleted: deleted, Stamp: s.String(), Device: p.name}
	return c
}

func push(t *testing.T, base, source string, revs []*capture.Capture) (tsync.PushReply, error) {
	raws := make([]json.RawMessage, len(revs))
	for i, r := range revs {
		raws[i], _ = json.Marshal(r)
	}
	body, _ := json.Marshal(tsync.PushRequest{Source: source, Revisions: raws})
	var rep tsync.PushReply
	resp, err := (&http.Client{Timeout: 20 * time.Second}).Post(base+"/api/v1/sync/push", "application/json", bytes.NewReader(body))
	if err != nil {
		return rep, err
	}
	defer resp.Body.Close()
	if resp.StatusCode != http.StatusOK {
		return rep, fmt.Errorf("push: %s", resp.Status)
	}
	err = json.NewDecoder(resp.Body).Decode(&rep)
	return rep, err
}

// feed pulls a server's whole change feed and fails on a revision served
// twice (a duplicate store).
func feed(t *testing.T, base string) map[string]capture.Capture {
	t.Helper()
	out := map[string]capture.Capture{}
	cursor := ""
	for {
		page := getPullPage(t, base, "limit=1000&cursor="+cursor)
		for _, c := range pageRevisions(t, page.Revisions) {
			if _, dup := out[c.Revision.ID]; dup {
				t.Fatalf("%s: revision %s is in the feed twice", base, c.Revision.ID)
			}
			out[c.Revision.ID] = c
		}
		cursor = page.Next
		if !page.More {
			return out
		}
	}
}

// getPullPage fetches one page of a server's change feed over HTTP; query
// is the URL query (limit, cursor, skip_source).
func getPullPage(t *testing.T, base, query string) tsync.PullPage {
	t.Helper()
	resp, err := http.Get(base + "/api/v1/sync/pull?" + query)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	var page tsync.PullPage
	if err := json.NewDecoder(resp.Body).Decode(&page); err != nil {
		t.Fatal(err)
	}
	return page
}

// pageRevisions decodes a feed page's revisions.
func pageRevisions(t *testing.T, raws []json.RawMessage) []capture.Capture {
	t.Helper()
	out := make([]capture.Capture, len(raws))
	for i, raw := range raws {
		if err := json.Unmarshal(raw, &out[i]); err != nil {
			t.Fatal(err)
		}
	}
	return out
}

func history(t *testing.T, base, id string) tsync.History {
	t.Helper()
	resp, err := http.Get(base + "/api/v1/studies/" + storetest.Study().ID + "/captures/" + id + "/history")
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	var h tsync.History
	if resp.StatusCode != http.StatusOK {
		t.Fatalf("history of %s at %s: %s", id, base, resp.Status)
	}
	if err := json.NewDecoder(resp.Body).Decode(&h); err != nil {
		t.Fatal(err)
	}
	return h
}

func runSyncCmd(t *testing.T, bin string, env []string, args ...string) (tsync.PeerReport, error) {
	t.Helper()
	cmd := exec.Command(bin, append([]string{"sync", "--json"}, args...)...)
	cmd.Env = append(os.Environ(), env...)
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	err := cmd.Run()
	var rep tsync.PeerReport
	if err == nil {
		if jerr := json.Unmarshal(out.Bytes(), &rep); jerr != nil {
			t.Fatalf("sync output: %v\n%s", jerr, out.String())
		}
	} else {
		err = fmt.Errorf("%w\n%s", err, errb.String())
	}
	return rep, err
}

func sameFeeds(t *testing.T, a, b map[string]capture.Capture) {
	t.Helper()
	if len(a) != len(b) {
		t.Fatalf("feeds hold %d and %d revisions", len(a), len(b))
	}
	for id, ra := range a {
		rb, ok := b[id]
		if !ok || ra.Revision.Stamp != rb.Revision.Stamp || ra.Revision.Depth != rb.Revision.Depth {
			t.Fatalf("revision %s differs: %+v / %+v", id, ra.Revision, rb.Revision)
		}
	}
}

// Two real servers on loopback sync with each other; then a third data
// file pulls from the second.
func TestSyncEndToEnd(t *testing.T) {
	bin := buildBinary(t)
	dir := t.TempDir()
	pa, pb, pc := freePort(t), freePort(t), freePort(t)
	a := fmt.Sprintf("http://127.0.0.1:%d", pa)
	b := fmt.Sprintf("http://127.0.0.1:%d", pb)
	c := fmt.Sprintf("http://127.0.0.1:%d", pc)
	serveWithEnv(t, bin, filepath.Join(dir, "camp.db"), pa)
	srvB := serveWithEnv(t, bin, filepath.Join(dir, "office.db"), pb)
	createStudy(t, a)
	createStudy(t, b)
	// The camp's coordinator gives the office a peer token, and the other
	// way round for the archive below.
	tokA, tokB := peerToken(t, a, storetest.Study().ID), peerToken(t, b, storetest.Study().ID)
	viaB := []string{"--server", b, "--data", filepath.Join(dir, "office.db"), "--peer", a, "--token", tokA}

	p1, p2 := newPhone("phone-1"), newPhone("phone-2")
	var ids []string
	var revs []*capture.Capture
	for i := 0; i < 40; i++ {
		id := uuid.Must(uuid.NewV7()).String()
		ids = append(ids, id)
		revs = append(revs, p1.rev(t, id, i, nil, false))
	}
	if rep, err := push(t, a, "phone-1", revs); err != nil || rep.Results[39].Status != tsync.StatusStored {
		t.Fatalf("push to camp: %v %+v", err, rep)
	}
	var officeRevs []*capture.Capture
	for i := 0; i < 10; i++ {
		officeRevs = append(officeRevs, p2.rev(t, uuid.Must(uuid.NewV7()).String(), 100+i, nil, false))
	}
	if _, err := push(t, b, "phone-2", officeRevs); err != nil {
		t.Fatal(err)
	}

	// The office's running server syncs with the camp.
	rep, err := runSyncCmd(t, bin, nil, append(viaB, "--page", "7")...)
	if err != nil {
		t.Fatal(err)
	}
	if rep.PulledStored != 40 || rep.PushedStored != 10 {
		t.Fatalf("first sync: %+v", rep)
	}
	// Concurrent edits of one record on each side, and a delete racing an
	// edit of another.
	e1 := p1.rev(t, ids[0], 1000, []string{revs[0].Revision.ID}, false)
	e2 := p2.rev(t, ids[0], 2000, []string{revs[0].Revision.ID}, false)
	d1 := p1.rev(t, ids[1], 1, []string{revs[1].Revision.ID}, true)
	e3 := p2.rev(t, ids[1], 3000, []string{revs[1].Revision.ID}, false)
	push(t, a, "phone-1", []*capture.Capture{e1, d1})
	push(t, b, "phone-2", []*capture.Capture{e2, e3})
	if rep, err = runSyncCmd(t, bin, nil, viaB...); err != nil {
		t.Fatal(err)
	}
	if rep.PulledStored != 2 || rep.PushedStored != 2 {
		t.Fatalf("second sync: %+v", rep)
	}
	for _, id := range ids[:2] {
		ha, hb := history(t, a, id), history(t, b, id)
		if !ha.Conflict || len(ha.Leaves) != 2 || ha.Winner != hb.Winner || strings.Join(ha.Leaves, ",") != strings.Join(hb.Leaves, ",") {
			t.Fatalf("record %s: camp %v %v %s, office %v %s", id, ha.Conflict, ha.Leaves, ha.Winner, hb.Leaves, hb.Winner)
		}
	}
	if h := history(t, a, ids[1]); h.Winner != e3.Revision.ID {
		t.Fatalf("edit racing a delete: winner %s, want the live edit %s", h.Winner, e3.Revision.ID)
	}
	// The coordinator resolves at the office; the camp gets it.
	h := history(t, b, ids[0])
	var res struct{ Capture capture.Capture }
	if code := postJSON(t, b+"/api/v1/studies/"+storetest.Study().ID+"/captures/"+ids[0]+"/resolve", map[string]any{"leaves": h.Leaves}, &res); code != http.StatusOK {
		t.Fatalf("resolve: %d", code)
	}
	if code := postJSON(t, b+"/api/v1/studies/"+storetest.Study().ID+"/captures/"+ids[0]+"/resolve", map[string]any{"leaves": h.Leaves}, nil); code != http.StatusConflict {
		t.Fatalf("resolve with stale leaves: %d, want 409", code)
	}
	if rep, err = runSyncCmd(t, bin, nil, viaB...); err != nil || rep.PushedStored != 1 {
		t.Fatalf("third sync: %+v %v", rep, err)
	}
	if h := history(t, a, ids[0]); h.Conflict || len(h.Leaves) != 1 || h.Winner != res.Capture.Revision.ID {
		t.Fatalf("camp after resolution: %+v", h)
	}
	// Converged: a further sync moves nothing.
	if rep, err = runSyncCmd(t, bin, nil, viaB...); err != nil || rep.Pulled != 0 || rep.Pushed != 0 {
		t.Fatalf("sync after convergence moved %+v %v", rep, err)
	}
	fa, fb := feed(t, a), feed(t, b)
	sameFeeds(t, fa, fb)

	// A third data file pulls from the office (its data file directly,
	// no server running on it).
	cdata := filepath.Join(dir, "archive.db")
	s, err := capture.Open(cdata, nil)
	if err != nil {
		t.Fatal(err)
	}
	if err := s.PutStudy(storetest.Study()); err != nil {
		t.Fatal(err)
	}
	s.Close()
	if rep, err = runSyncCmd(t, bin, nil, "--data", cdata, "--peer", b, "--token", tokB); err != nil || rep.PulledStored != len(fb) || rep.PushedStored != 0 {
		t.Fatalf("archive sync: %+v %v (office has %d)", rep, err, len(fb))
	}
	serveWithEnv(t, bin, cdata, pc)
	sameFeeds(t, feed(t, c), fb)
	for _, id := range ids[:3] {
		hb, hc := history(t, b, id), history(t, c, id)
		if hb.Winner != hc.Winner || len(hb.Revisions) != len(hc.Revisions) {
			t.Fatalf("archive differs on %s", id)
		}
	}
	// The scheduled mode (for serve) reaches the same state on its own.
	ddata := filepath.Join(dir, "scheduled.db")
	ds, err := capture.Open(ddata, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer ds.Close()
	if err := ds.PutStudy(storetest.Study()); err != nil {
		t.Fatal(err)
	}
	eng, err := tsync.Open(ds, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer eng.Close()
	ctx, cancel := context.WithCancel(context.Background())
	done := startPeerSync(ctx, eng, tsync.Peer{URL: b, PageSize: 9}, 20*time.Millisecond, slog.New(slog.NewTextHandler(io.Discard, nil)))
	deadline := time.Now().Add(30 * time.Second)
	for {
		page, err := eng.Pull(tsync.PullRequest{Limit: 1000})
		if err != nil {
			t.Fatal(err)
		}
		if len(page.Revisions) == len(fb) {
			break
		}
		if time.Now().After(deadline) {
			t.Fatalf("scheduled sync holds %d of %d revisions", len(page.Revisions), len(fb))
		}
		time.Sleep(20 * time.Millisecond)
	}
	cancel()
	<-done

	stopServe(t, srvB)
	if err := checkFile(filepath.Join(dir, "office.db")); err != nil {
		t.Fatal(err)
	}
}

// killedBySignal reports whether the process ended by SIGKILL.
func killedBySignal(ps *os.ProcessState) bool {
	ws, ok := ps.Sys().(syscall.WaitStatus)
	return ok && ws.Signaled() && ws.Signal() == syscall.SIGKILL
}

// A server killed (SIGKILL) right after committing a push, before its reply,
// while several phones push: after restart every acknowledged revision is
// there, re-sending the unacknowledged ones stores each once, and the
// batch that was committed but never answered comes back "already had".
func TestSyncCrashDuringPushes(t *testing.T) {
	bin := buildBinary(t)
	data := filepath.Join(t.TempDir(), "camp.db")
	port := freePort(t)
	base := fmt.Sprintf("http://127.0.0.1:%d", port)
	srv := serveWithEnv(t, bin, data, port, "TAGTALLY_SYNC_FAULT=after-push-commit:25")
	createStudy(t, base)

	type outbox struct {
		mu      sync.Mutex
		pending []*capture.Capture
		acked   []string
	}
	const phones = 3
	boxes := make([]*outbox, phones)
	var wg sync.WaitGroup
	for w := 0; w < phones; w++ {
		boxes[w] = &outbox{}
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			ph := newPhone(fmt.Sprintf("phone-%d", w))
			box := boxes[w]
			var last *capture.Capture
			for i := 0; ; i++ {
				var batch []*capture.Capture
				for j := 0; j < 20; j++ {
					if last != nil && j%4 == 0 { // an edit of the previous record
						last = ph.rev(t, last.ID, i*100+j, []string{last.Revision.ID}, false)
					} else {
						last = ph.rev(t, uuid.Must(uuid.NewV7()).String(), i*100+j, nil, false)
					}
					batch = append(batch, last)
				}
				box.pending = append(box.pending, batch...)
				rep, err := push(t, base, ph.name, box.pending)
				if err != nil {
					return // the server is gone; the outbox keeps everything unconfirmed
				}
				var keep []*capture.Capture
				for k, r := range rep.Results {
					if r.Confirmed() {
						box.acked = append(box.acked, r.Revision)
					} else {
						keep = append(keep, box.pending[k])
					}
				}
				box.pending = keep
			}
		}(w)
	}
	wg.Wait()
	srv.Wait()
	if !killedBySignal(srv.ProcessState) {
		t.Fatalf("the server was not killed at the fault point: %v", srv.ProcessState)
	}
	serveWithEnv(t, bin, data, port)
	got := feed(t, base) // fails on duplicates
	acked := 0
	for _, box := range boxes {
		for _, id := range box.acked {
			acked++
			if _, ok := got[id]; !ok {
				t.Fatalf("acknowledged revision %s lost", id)
			}
		}
	}
	already := 0
	total := acked
	for w, box := range boxes {
		if len(box.pending) == 0 {
			continue
		}
		rep, err := push(t, base, fmt.Sprintf("phone-%d", w), box.pending)
		if err != nil {
			t.Fatal(err)
		}
		for _, r := range rep.Results {
			if !r.Confirmed() {
				t.Fatalf("re-push: %+v", r)
			}
			if r.Status == tsync.StatusAlreadyHad {
				already++
			}
		}
		total += len(box.pending)
	}
	if already == 0 {
		t.Fatal("the batch committed before the kill should come back as already had")
	}
	if got = feed(t, base); len(got) != total {
		t.Fatalf("feed holds %d revisions, phones made %d", len(got), total)
	}
	t.Logf("%d acknowledged before the kill, %d unanswered but committed, %d in all", acked, already, total)
}

// checkpointsBehindData opens a data file after its sync process was
// killed and checks that its checkpoints for the peer are not ahead of the
// data: everything the push checkpoint covers is at the peer (peerFeed),
// everything the pull cursor covers is here. It pages through both feeds,
// however long they are, and returns the checkpoint.
func checkpointsBehindData(t *testing.T, data, peer string, peerFeed map[string]capture.Capture) tsync.PeerCheckpoint {
	t.Helper()
	s, err := capture.Open(data, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	if err := s.Check(); err != nil {
		t.Fatal(err)
	}
	e, err := tsync.Open(s, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
	cp, err := e.PeerCheckpoint(peer)
	if err != nil {
		t.Fatal(err)
	}
	// Every revision here, and the first cp.Pushed entries of this feed.
	// Without a filter each feed entry is one revision, so a page limited
	// to the entries left ends exactly at the checkpoint.
	here := map[string]bool{}
	pushed := 0
	for cursor, seq := tsync.FormatCursor(e.Epoch(), 0), uint64(0); ; {
		page, err := e.Pull(tsync.PullRequest{Cursor: cursor, Limit: tsync.MaxPullLimit})
		if err != nil {
			t.Fatal(err)
		}
		for _, c := range pageRevisions(t, page.Revisions) {
			here[c.Revision.ID] = true
			seq++
			if cp.LocalEpoch == e.Epoch() && seq <= cp.Pushed {
				pushed++
				if _, ok := peerFeed[c.Revision.ID]; !ok {
					t.Fatalf("push checkpoint %d covers revision %s (feed entry %d), which the peer does not have", cp.Pushed, c.Revision.ID, seq)
				}
			}
		}
		cursor = page.Next
		if !page.More {
			break
		}
	}
	if cp.LocalEpoch == e.Epoch() && uint64(pushed) != cp.Pushed {
		t.Fatalf("push checkpoint %d is beyond this feed's %d entries", cp.Pushed, pushed)
	}
	// The first entries of the peer's feed, up to the pull cursor.
	var pulled uint64
	if cp.Pulled != "" {
		if _, pulled, err = tsync.ParseCursor(cp.Pulled); err != nil {
			t.Fatal(err)
		}
	}
	for cursor, seq := "", uint64(0); seq < pulled; {
		page := getPullPage(t, peer, fmt.Sprintf("limit=%d&cursor=%s", min(pulled-seq, tsync.MaxPullLimit), cursor))
		if page.Epoch != cp.PeerEpoch {
			t.Fatalf("the peer's epoch is %s, the pull cursor's %s", page.Epoch, cp.PeerEpoch)
		}
		for _, c := range pageRevisions(t, page.Revisions) {
			seq++
			if !here[c.Revision.ID] {
				t.Fatalf("pull cursor at %d covers revision %s (peer feed entry %d), which is not here", pulled, c.Revision.ID, seq)
			}
		}
		if !page.More && seq < pulled {
			t.Fatalf("pull cursor at %d is beyond the peer's %d feed entries", pulled, seq)
		}
		cursor = page.Next
	}
	t.Logf("pull cursor at %d, push checkpoint at %d: both covered by data", pulled, cp.Pushed)
	return cp
}

// A peer sync killed between a committed push (confirmed by the peer) and
// its checkpoint write, and another killed right after a pulled page's
// commit: no checkpoint is ahead of its data, and running the sync again
// completes it with no duplicates.
func TestSyncCrashBeforeCheckpoint(t *testing.T) {
	bin := buildBinary(t)
	dir := t.TempDir()
	pa, pb := freePort(t), freePort(t)
	a := fmt.Sprintf("http://127.0.0.1:%d", pa)
	b := fmt.Sprintf("http://127.0.0.1:%d", pb)
	serveWithEnv(t, bin, filepath.Join(dir, "office.db"), pa)
	bdata := filepath.Join(dir, "camp.db")
	srvB := serveWithEnv(t, bin, bdata, pb)
	createStudy(t, a)
	createStudy(t, b)
	tokA := peerToken(t, a, storetest.Study().ID)
	ph := newPhone("phone-1")
	var revs []*capture.Capture
	for i := 0; i < 300; i++ {
		revs = append(revs, ph.rev(t, uuid.Must(uuid.NewV7()).String(), i, nil, false))
	}
	if _, err := push(t, b, "phone-1", revs[:150]); err != nil {
		t.Fatal(err)
	}
	if _, err := push(t, b, "phone-1", revs[150:]); err != nil {
		t.Fatal(err)
	}
	other := newPhone("phone-9")
	var arevs []*capture.Capture
	for i := 0; i < 120; i++ {
		arevs = append(arevs, other.rev(t, uuid.Must(uuid.NewV7()).String(), 500+i, nil, false))
	}
	if _, err := push(t, a, "phone-9", arevs); err != nil {
		t.Fatal(err)
	}
	stopServe(t, srvB)

	// Killed after the 2nd pulled page is committed with its cursor.
	_, err := runSyncCmd(t, bin, []string{"TAGTALLY_SYNC_FAULT=after-pull-commit:2"}, "--data", bdata, "--peer", a, "--token", tokA, "--page", "50")
	if err == nil || !strings.Contains(err.Error(), "killed") {
		t.Fatalf("sync was not killed at the fault point: %v", err)
	}
	checkpointsBehindData(t, bdata, a, feed(t, a))

	// Killed after the peer confirmed the 3rd pushed page, before the
	// checkpoint: the checkpoint stays at the 2nd page.
	_, err = runSyncCmd(t, bin, []string{"TAGTALLY_SYNC_FAULT=before-push-checkpoint:3"}, "--data", bdata, "--peer", a, "--token", tokA, "--page", "50")
	if err == nil || !strings.Contains(err.Error(), "killed") {
		t.Fatalf("sync was not killed at the fault point: %v", err)
	}
	fa := feed(t, a) // no duplicates
	if len(fa) != 120+150 {
		t.Fatalf("peer holds %d revisions after three pushed pages, want %d", len(fa), 120+150)
	}
	checkpointsBehindData(t, bdata, a, fa)

	// Run again: it resumes; the unrecorded page comes back as already had.
	rep, err := runSyncCmd(t, bin, nil, "--data", bdata, "--peer", a, "--token", tokA, "--page", "50")
	if err != nil {
		t.Fatal(err)
	}
	if rep.PushedStored != 150 || rep.Pushed != 200 {
		t.Fatalf("resumed sync: %+v; want 200 sent (50 again), 150 new", rep)
	}
	fa = feed(t, a)
	if len(fa) != 420 {
		t.Fatalf("peer holds %d revisions, want 420", len(fa))
	}
	srvB = serveWithEnv(t, bin, bdata, pb)
	sameFeeds(t, feed(t, b), fa)
	stopServe(t, srvB)
	if err := checkFile(bdata); err != nil {
		t.Fatal(err)
	}
}
