package main

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"sync"
	"testing"
	"time"

	"github.com/google/uuid"

	"tagtally/capture"
	"tagtally/capture/storetest"
	tsync "tagtally/sync"
)

// serveScheduled starts `tagtally serve` with its scheduled sync with peer
// and extra environment variables.
func serveScheduled(t *testing.T, bin, data string, port int, peer string, every time.Duration, env ...string) (*exec.Cmd, *lockedBuffer) {
	t.Helper()
	return startServeProcess(t, bin, data, port, env, "--sync-peer", peer, "--sync-every", every.String())
}

// peerSyncLog is one "peer sync" line of serve's log (startPeerSync).
type peerSyncLog struct{ received, newHere, sent, newThere, refused int }

var peerSyncLine = regexp.MustCompile(`peer sync peer=\S+ received=(\d+) new_here=(\d+) sent=(\d+) new_there=(\d+) refused=(\d+)`)

// waitPeerSync waits for serve's first completed scheduled sync and returns
// what it logged; a failed sync fails the test.
func waitPeerSync(t *testing.T, out *lockedBuffer) peerSyncLog {
	t.Helper()
	for deadline := time.Now().Add(time.Minute); time.Now().Before(deadline); time.Sleep(20 * time.Millisecond) {
		s := out.String()
		if bytes.Contains([]byte(s), []byte("peer sync failed")) {
			t.Fatalf("scheduled sync failed:\n%s", s)
		}
		if m := peerSyncLine.FindStringSubmatch(s); m != nil {
			var n [5]int
			for i := range n {
				n[i], _ = strconv.Atoi(m[i+1])
			}
			return peerSyncLog{n[0], n[1], n[2], n[3], n[4]}
		}
	}
	t.Fatalf("no scheduled sync finished:\n%s", out.String())
	return peerSyncLog{}
}

// pushingPhone pushes batches of new records and edits to one server until
// the server is gone or stop is closed, keeping an outbox as the phone app
// does: a revision leaves it only when the server confirms it.
type pushingPhone struct {
	*phone
	base    string
	pending []*capture.Capture
	acked   []string
	err     error // an answer that was not a confirmation or a lost server
}

func (p *pushingPhone) run(t *testing.T, stop <-chan struct{}) {
	var last *capture.Capture
	for i := 0; ; i++ {
		select {
		case <-stop:
			return
		default:
		}
		for j := 0; j < 20; j++ {
			if last != nil && j%4 == 0 {
				last = p.rev(t, last.ID, i*100+j, []string{last.Revision.ID}, false)
			} else {
				last = p.rev(t, uuid.Must(uuid.NewV7()).String(), i*100+j, nil, false)
			}
			p.pending = append(p.pending, last)
		}
		rep, err := push(t, p.base, p.name, p.pending)
		if err != nil {
			return // the server is gone; the outbox keeps the unconfirmed
		}
		var keep []*capture.Capture
		for k, r := range rep.Results {
			if r.Confirmed() {
				p.acked = append(p.acked, r.Revision)
			} else {
				keep = append(keep, p.pending[k])
				p.err = fmt.Errorf("%s: revision %s not confirmed: %+v", p.name, r.Revision, r)
			}
		}
		p.pending = keep
		time.Sleep(5 * time.Millisecond) // leave the scheduled sync room to run
	}
}

// pullAfter counts the revisions in a server's feed after cursor, leaving
// out those from skipSource, and returns their IDs.
func pullAfter(t *testing.T, base, cursor, skipSource string) []string {
	t.Helper()
	var ids []string
	for {
		page := getPullPage(t, base, fmt.Sprintf("limit=1000&cursor=%s&skip_source=%s", cursor, skipSource))
		for _, c := range pageRevisions(t, page.Revisions) {
			ids = append(ids, c.Revision.ID)
		}
		cursor = page.Next
		if !page.More {
			return ids
		}
	}
}

// A serving camp server (`tagtally serve --sync-peer`) is killed with
// SIGKILL by its scheduled sync with the office, after the office has
// committed and confirmed a pushed page and before the camp writes its push
// checkpoint, while phones push to both servers. Checked afterwards: no
// checkpoint is ahead of its data; after the restart every revision either
// server acknowledged is on both, none twice; the first scheduled sync
// after the restart sends exactly the camp's feed after its checkpoint (the
// page confirmed before the kill comes back "already had") and receives
// exactly the office's feed after the pull cursor; and once the phones have
// sent their outboxes again one more sync moves only their new revisions,
// the next nothing.
func TestServeScheduledSyncCrashBeforePushCheckpoint(t *testing.T) {
	bin := buildBinary(t)
	dir := t.TempDir()
	pa, pb := freePort(t), freePort(t)
	office := fmt.Sprintf("http://127.0.0.1:%d", pa)
	camp := fmt.Sprintf("http://127.0.0.1:%d", pb)
	serveWithEnv(t, bin, filepath.Join(dir, "office.db"), pa)
	createStudy(t, office)
	cdata := filepath.Join(dir, "camp.db")
	srv := serveWithEnv(t, bin, cdata, pb)
	createStudy(t, camp) // before the first sync: a revision of a study the camp lacks is refused for good
	stopServe(t, srv)
	// The office's coordinator gives the camp a peer token for the study.
	peerTok := peerToken(t, office, storetest.Study().ID)
	peerEnv := "TAGTALLY_PEER_TOKEN=" + peerTok

	// Every 100 ms the scheduled sync pulls what the office phone sent and
	// pushes (as one page) what the camp phones sent since the last run; a
	// run with nothing to push does not reach the fault point. The camp is
	// killed at the 3rd page the office confirms, while the phones push.
	const killAt = 3
	srv, out := serveScheduled(t, bin, cdata, pb, office, 100*time.Millisecond, peerEnv, fmt.Sprintf("TAGTALLY_SYNC_FAULT=before-push-checkpoint:%d", killAt))
	stopOffice := make(chan struct{})
	campPhones := []*pushingPhone{{phone: newPhone("phone-1"), base: camp}, {phone: newPhone("phone-2"), base: camp}}
	officePhone := &pushingPhone{phone: newPhone("phone-9"), base: office}
	var wg, wgOffice sync.WaitGroup
	for _, p := range campPhones {
		wg.Add(1)
		go func() { defer wg.Done(); p.run(t, nil) }()
	}
	wgOffice.Add(1)
	go func() { defer wgOffice.Done(); officePhone.run(t, stopOffice) }()
	exited := make(chan struct{})
	go func() { srv.Wait(); close(exited) }()
	select {
	case <-exited:
	case <-time.After(2 * time.Minute):
		srv.Process.Kill()
		<-exited
		t.Fatalf("the camp server never reached the fault point:\n%s", out)
	}
	wg.Wait()
	close(stopOffice)
	wgOffice.Wait()
	if !killedBySignal(srv.ProcessState) {
		t.Fatalf("the camp server was not killed at the fault point: %v\n%s", srv.ProcessState, out)
	}
	for _, p := range append(campPhones, officePhone) {
		if p.err != nil {
			t.Fatal(p.err)
		}
	}
	if n := len(peerSyncLine.FindAllString(out.String(), -1)); n < 1 {
		t.Fatalf("the camp logged no completed sync before the kill:\n%s", out)
	}

	// While nothing runs on the camp's file: checkpoints behind data.
	officeFeed := feed(t, office) // fails on a revision stored twice
	cp := checkpointsBehindData(t, cdata, office, officeFeed)
	if cp.Pushed == 0 || cp.Pulled == "" {
		t.Fatalf("the runs before the kill left no checkpoint: %+v", cp)
	}
	// What the next sync must move: the camp's feed after the push
	// checkpoint (read from the file, the way the sync reads it) and the
	// office's feed after the pull cursor.
	s, err := capture.Open(cdata, nil)
	if err != nil {
		t.Fatal(err)
	}
	e, err := tsync.Open(s, nil)
	if err != nil {
		t.Fatal(err)
	}
	campReplica := e.Replica()
	var toSend []string
	for cursor := tsync.FormatCursor(e.Epoch(), cp.Pushed); ; {
		page, err := e.Pull(tsync.PullRequest{Cursor: cursor, SkipSource: cp.PeerReplica, Limit: 1000})
		if err != nil {
			t.Fatal(err)
		}
		for _, c := range pageRevisions(t, page.Revisions) {
			toSend = append(toSend, c.Revision.ID)
		}
		cursor = page.Next
		if !page.More {
			break
		}
	}
	e.Close()
	s.Close()
	alreadyThere := 0
	for _, id := range toSend {
		if _, ok := officeFeed[id]; ok {
			alreadyThere++
		}
	}
	if alreadyThere == 0 {
		t.Fatal("the page the office confirmed before the kill is not after the camp's push checkpoint")
	}
	toReceive := pullAfter(t, office, cp.Pulled, campReplica)

	// Restart with the schedule (once, at start) and no fault.
	srv, out = serveScheduled(t, bin, cdata, pb, office, time.Hour, peerEnv)
	got := waitPeerSync(t, out)
	want := peerSyncLog{received: len(toReceive), newHere: len(toReceive), sent: len(toSend), newThere: len(toSend) - alreadyThere}
	if got != want {
		t.Fatalf("first sync after the restart moved %+v, want %+v", got, want)
	}
	campFeed, officeFeed := feed(t, camp), feed(t, office)
	acked := 0
	for _, p := range append(campPhones, officePhone) {
		for _, id := range p.acked {
			acked++
			if _, ok := campFeed[id]; !ok {
				t.Fatalf("revision %s acknowledged to %s is not at the camp", id, p.name)
			}
			if _, ok := officeFeed[id]; !ok {
				t.Fatalf("revision %s acknowledged to %s is not at the office", id, p.name)
			}
		}
	}
	sameFeeds(t, campFeed, officeFeed)

	// The camp phones send what was never confirmed (the kill cut their
	// last push); one more sync carries exactly the new ones over.
	resent, stored := 0, 0
	for _, p := range campPhones {
		if len(p.pending) == 0 {
			continue
		}
		rep, err := push(t, camp, p.name, p.pending)
		if err != nil {
			t.Fatal(err)
		}
		for _, r := range rep.Results {
			if !r.Confirmed() {
				t.Fatalf("resent revision not confirmed: %+v", r)
			}
			if r.Status == tsync.StatusStored {
				stored++
			}
		}
		resent += len(p.pending)
	}
	rep, err := runSyncCmd(t, bin, nil, "--server", camp, "--data", cdata, "--peer", office, "--token", peerTok)
	if err != nil {
		t.Fatal(err)
	}
	if rep.Pulled != 0 || rep.Pushed != stored || rep.PushedStored != stored || rep.Rejected != 0 {
		t.Fatalf("sync after the phones resent %d (%d new): %+v", resent, stored, rep)
	}
	if rep, err = runSyncCmd(t, bin, nil, "--server", camp, "--data", cdata, "--peer", office, "--token", peerTok); err != nil || rep.Pulled != 0 || rep.Pushed != 0 {
		t.Fatalf("sync after convergence moved %+v %v", rep, err)
	}
	campFeed = feed(t, camp)
	sameFeeds(t, campFeed, feed(t, office))
	// The resent revisions that were already there are the ones the kill
	// cut off between commit and answer.
	if len(campFeed) != acked+resent {
		t.Fatalf("the servers hold %d revisions; the phones had %d acknowledged and resent %d", len(campFeed), acked, resent)
	}
	t.Logf("killed at pushed page %d: %d acknowledged before the kill; the next sync sent %d (%d already there) and received %d; %d resent, %d new",
		killAt, acked, got.sent, alreadyThere, got.received, resent, stored)
	stopServe(t, srv)
	if err := checkFile(cdata); err != nil {
		t.Fatal(err)
	}
}

// Bad scheduled-sync options are usage errors, found before the data file
// is opened.
func TestServeSyncOptions(t *testing.T) {
	data := filepath.Join(t.TempDir(), "camp.db")
	for _, args := range [][]string{
		{"--sync-peer", "ftp://10.0.0.2"},
		{"--sync-peer", "10.0.0.2:8080"},
		{"--sync-peer", "http://10.0.0.2:8080", "--sync-every", "0s"},
		{"--sync-peer", "http://10.0.0.2:8080", "--sync-every", "-1m"},
	} {
		var out bytes.Buffer
		err := runServe(append([]string{"--data", data, "--port", "0"}, args...), &out)
		if !errors.Is(err, errUsage) {
			t.Errorf("serve %v: %v, want a usage error", args, err)
		}
	}
	if _, err := os.Stat(data); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("a refused serve created the data file: %v", err)
	}
}
