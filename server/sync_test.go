package server

import (
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"net/http"
	"net/http/httptest"
	"os"
	"strings"
	"testing"
	"time"

	"tagtally/capture"
	tsync "tagtally/sync"
)

// phoneRevision is a first revision made offline by a phone.
func phoneRevision(t *testing.T, study, id, tag string) string {
	t.Helper()
	c := &capture.Capture{ID: id, StudyID: study, TagID: tag, Event: capture.EventNewMark, StationID: "A1",
		CapturedAt: time.Date(2025, 6, 2, 22, 0, 0, 0, time.UTC)}
	rid, err := tsync.RevisionID(c, nil, false)
	if err != nil {
		t.Fatal(err)
	}
	c.Revision = capture.Revision{ID: rid, Stamp: tsync.Stamp{Wall: 1_750_000_000_000, Device: "phone-1"}.String(), Device: "phone-1"}
	b, _ := json.Marshal(c)
	return string(b)
}

func TestSyncPushPullHistoryResolve(t *testing.T) {
	ts := newTestServer(t, nil)
	id := "01890a5d-ac96-774b-bcce-b302099a8057"
	good := phoneRevision(t, ts.study.ID, id, "BF-0007")
	a := ts.do(t, http.MethodPost, "/api/v1/sync/push", `{"source":"phone-1","revisions":[`+good+`, 17, {"id":"nope"}]}`)
	if a.status != http.StatusOK {
		t.Fatalf("push: %d %s", a.status, a.raw)
	}
	var rep tsync.PushReply
	a.decode(t, &rep)
	if len(rep.Results) != 3 || rep.Results[0].Status != tsync.StatusStored || rep.Results[1].Status != tsync.StatusRejected || rep.Results[2].Status != tsync.StatusRejected || rep.Epoch == "" {
		t.Fatalf("push reply %+v", rep)
	}
	// The pushed record is in the capture store, versioned.
	c, err := ts.store.GetCapture(ts.study.ID, id)
	if err != nil || c.Revision.ID != rep.Results[0].Revision || c.Revision.Depth != 1 {
		t.Fatalf("stored %+v %v", c, err)
	}
	a = ts.do(t, http.MethodGet, "/api/v1/sync/pull?limit=10", "")
	var page tsync.PullPage
	a.decode(t, &page)
	if len(page.Revisions) != 1 || page.More || !page.Reset {
		t.Fatalf("pull %+v", page)
	}
	if a = ts.do(t, http.MethodGet, "/api/v1/sync/pull?cursor="+page.Next+"&skip_source=phone-1", ""); a.status != http.StatusOK {
		t.Fatal(a.status)
	}
	a.decode(t, &page)
	if len(page.Revisions) != 0 {
		t.Fatalf("nothing new expected, got %d", len(page.Revisions))
	}
	// A concurrent edit from another phone makes a conflict.
	var first capture.Capture
	json.Unmarshal([]byte(good), &first)
	edit := first
	edit.Notes = "wing torn"
	edit.Revision = capture.Revision{Parents: []string{first.Revision.ID}, Stamp: tsync.Stamp{Wall: 1_750_000_100_000, Device: "phone-2"}.String()}
	edit.Revision.ID, _ = tsync.RevisionID(&edit, edit.Revision.Parents, false)
	other := first
	other.Notes = "released at A2"
	other.Revision = capture.Revision{Parents: []string{first.Revision.ID}, Stamp: tsync.Stamp{Wall: 1_750_000_200_000, Device: "phone-3"}.String()}
	other.Revision.ID, _ = tsync.RevisionID(&other, other.Revision.Parents, false)
	ej, _ := json.Marshal(edit)
	oj, _ := json.Marshal(other)
	ts.do(t, http.MethodPost, "/api/v1/sync/push", fmt.Sprintf(`{"source":"phone-2","revisions":[%s,%s]}`, ej, oj))
	a = ts.do(t, http.MethodGet, "/api/v1/studies/"+ts.study.ID+"/captures/"+id+"/history", "")
	var h tsync.History
	a.decode(t, &h)
	if !h.Conflict || len(h.Leaves) != 2 || len(h.Revisions) != 3 || h.Winner != other.Revision.ID {
		t.Fatalf("history %+v", h)
	}
	// Resolve: stale leaves are refused, the right ones accepted.
	if a = ts.do(t, http.MethodPost, "/api/v1/studies/"+ts.study.ID+"/captures/"+id+"/resolve", `{"leaves":["`+edit.Revision.ID+`"]}`); a.status != http.StatusConflict {
		t.Fatalf("stale resolve: %d %s", a.status, a.raw)
	}
	body := fmt.Sprintf(`{"leaves":["%s","%s"],"capture":{"tag_id":"BF-0007","event":"new","station_id":"A1","captured_at":"2025-06-02T22:00:00Z","notes":"wing torn; released at A2"}}`, h.Leaves[0], h.Leaves[1])
	if a = ts.do(t, http.MethodPost, "/api/v1/studies/"+ts.study.ID+"/captures/"+id+"/resolve", body); a.status != http.StatusOK {
		t.Fatalf("resolve: %d %s", a.status, a.raw)
	}
	c, _ = ts.store.GetCapture(ts.study.ID, id)
	if c.Revision.Conflict || c.Notes != "wing torn; released at A2" || len(c.Revision.Parents) != 2 {
		t.Fatalf("after resolve %+v", c)
	}
	if a = ts.do(t, http.MethodGet, "/api/v1/studies/"+ts.study.ID+"/captures/01890a5d-ac96-774b-bcce-b302099a8000/history", ""); a.status != http.StatusNotFound {
		t.Fatalf("history of unknown record: %d", a.status)
	}
}

func TestSyncRequestErrors(t *testing.T) {
	ts := newTestServer(t, nil)
	many := `{"revisions":[` + strings.TrimSuffix(strings.Repeat("{},", tsync.MaxPushRevisions+1), ",") + `]}`
	for _, c := range []struct {
		method, path, body string
		want               int
	}{
		{http.MethodPost, "/api/v1/sync/push", `[1,2]`, http.StatusBadRequest},
		{http.MethodPost, "/api/v1/sync/push", `{"revisions":[`, http.StatusBadRequest},
		{http.MethodPost, "/api/v1/sync/push", many, http.StatusRequestEntityTooLarge},
		{http.MethodGet, "/api/v1/sync/pull?cursor=garbage", "", http.StatusBadRequest},
		{http.MethodGet, "/api/v1/sync/pull?limit=0", "", http.StatusBadRequest},
		{http.MethodGet, "/api/v1/sync/pull?limit=x", "", http.StatusBadRequest},
		{http.MethodPost, "/api/v1/sync/peer", `{"url":""}`, http.StatusBadRequest},
		{http.MethodGet, "/api/v1/sync", "", http.StatusOK},
	} {
		a := ts.do(t, c.method, c.path, c.body)
		if a.status != c.want {
			t.Errorf("%s %s: %d, want %d (%s)", c.method, c.path, a.status, c.want, a.raw)
		}
	}
	// Starting a peer sync is for this machine only.
	srv, err := New(ts.store, DefaultConfig())
	if err != nil {
		t.Fatal(err)
	}
	req := httptest.NewRequest(http.MethodPost, "/api/v1/sync/peer", strings.NewReader(`{"url":"http://127.0.0.1:1"}`))
	req.Header.Set("Content-Type", "application/json")
	req.RemoteAddr = "192.0.2.7:50000"
	rec := httptest.NewRecorder()
	srv.Handler().ServeHTTP(rec, req)
	if rec.Code != http.StatusForbidden {
		t.Fatalf("peer sync from another machine: %d", rec.Code)
	}
}

// An edit through the capture API is a revision in the same transaction
// as the store write, so a phone's later push of an edit made on the old
// version is a conflict with both versions kept, not an overwrite of the
// coordinator's edit (issue 5: "no accepted write is ever lost").
func TestAPIEditThenStalePushIsConflict(t *testing.T) {
	ts := newTestServer(t, nil)
	base := "/api/v1/studies/" + ts.study.ID + "/captures"
	a := ts.do(t, http.MethodPost, base, validCapture)
	if a.status != http.StatusCreated {
		t.Fatalf("create = %d %s", a.status, a.raw)
	}
	var created captureAnswer
	a.decode(t, &created)
	first := *created.Capture
	if first.Revision.ID == "" || first.Revision.Depth != 1 {
		t.Fatalf("created record has no first revision: %+v", first.Revision)
	}

	// The coordinator corrects the mass (the body names no revision: the
	// edit is of the current version).
	a = ts.do(t, http.MethodPut, base+"/"+first.ID, strings.Replace(validCapture, "21.5", "23", 1))
	var upd captureAnswer
	a.decode(t, &upd)
	if a.status != http.StatusOK || len(upd.Capture.Revision.Parents) != 1 || upd.Capture.Revision.Parents[0] != first.Revision.ID {
		t.Fatalf("update = %d %s; want a child revision of %s", a.status, a.raw, first.Revision.ID)
	}
	// Both revisions are in the change feed at once, without any adoption.
	var page tsync.PullPage
	ts.do(t, http.MethodGet, "/api/v1/sync/pull", "").decode(t, &page)
	if len(page.Revisions) != 2 {
		t.Fatalf("feed after create and edit holds %d revisions, want 2", len(page.Revisions))
	}

	// A phone that had the first version edits the notes offline and
	// pushes its revision, whose parent is the first version.
	phone := first
	phone.Notes = "ear nicked"
	phone.Revision = capture.Revision{Parents: []string{first.Revision.ID}, Stamp: tsync.Stamp{Wall: time.Now().UnixMilli(), Device: "phone-9"}.String(), Device: "phone-9"}
	phone.Revision.ID, _ = tsync.RevisionID(&phone, phone.Revision.Parents, false)
	pj, _ := json.Marshal(phone)
	a = ts.do(t, http.MethodPost, "/api/v1/sync/push", `{"source":"phone-9","revisions":[`+string(pj)+`]}`)
	var rep tsync.PushReply
	a.decode(t, &rep)
	if a.status != http.StatusOK || len(rep.Results) != 1 || rep.Results[0].Status != tsync.StatusStored || !rep.Results[0].Conflict {
		t.Fatalf("stale push = %d %+v; want stored and a conflict", a.status, rep.Results)
	}
	a = ts.do(t, http.MethodGet, base+"/"+first.ID+"/history", "")
	var h tsync.History
	a.decode(t, &h)
	want := []string{upd.Capture.Revision.ID, phone.Revision.ID}
	if want[0] > want[1] {
		want[0], want[1] = want[1], want[0]
	}
	if !h.Conflict || len(h.Revisions) != 3 || len(h.Leaves) != 2 || h.Leaves[0] != want[0] || h.Leaves[1] != want[1] {
		t.Fatalf("history %+v; want leaves %v (the API edit and the phone's) and 3 revisions", h, want)
	}
	var mass23, notes bool
	for _, r := range h.Revisions {
		mass23 = mass23 || (r.Revision.ID == upd.Capture.Revision.ID && r.MassG != nil && *r.MassG == 23)
		notes = notes || (r.Revision.ID == phone.Revision.ID && r.Notes == "ear nicked")
	}
	if !mass23 || !notes {
		t.Fatalf("history lost a version: API edit kept %v, phone edit kept %v", mass23, notes)
	}
	var cur capture.Capture
	ts.do(t, http.MethodGet, base+"/"+first.ID, "").decode(t, &cur)
	if !cur.Revision.Conflict {
		t.Errorf("the record is not shown in conflict: %+v", cur.Revision)
	}

	// An API edit made from the old version (the body names it, as the
	// coordinator's editor does) is a third leaf, not an overwrite.
	stale := first
	stale.Observer = "second crew"
	sj, _ := json.Marshal(stale)
	a = ts.do(t, http.MethodPut, base+"/"+first.ID, string(sj))
	var st captureAnswer
	a.decode(t, &st)
	if a.status != http.StatusOK || !st.Capture.Revision.Conflict {
		t.Fatalf("stale API edit = %d %s; want stored as a conflict", a.status, a.raw)
	}
	ts.do(t, http.MethodGet, base+"/"+first.ID+"/history", "").decode(t, &h)
	if len(h.Leaves) != 3 || len(h.Revisions) != 4 {
		t.Fatalf("after a stale API edit: %d leaves, %d revisions; want 3 and 4", len(h.Leaves), len(h.Revisions))
	}

	// A base revision this server does not hold is refused.
	stale.Revision = capture.Revision{ID: strings.Repeat("ab", 16)}
	sj, _ = json.Marshal(stale)
	if a = ts.do(t, http.MethodPut, base+"/"+first.ID, string(sj)); a.status != http.StatusConflict {
		t.Errorf("edit of an unknown revision = %d %s, want 409", a.status, a.raw)
	}
	// A record in conflict is resolved, not deleted, from the API.
	if a = ts.do(t, http.MethodDelete, base+"/"+first.ID, ""); a.status != http.StatusConflict {
		t.Fatalf("delete of a record in conflict = %d %s, want 409", a.status, a.raw)
	}
	res := fmt.Sprintf(`{"leaves":["%s","%s","%s"]}`, h.Leaves[0], h.Leaves[1], h.Leaves[2])
	if a = ts.do(t, http.MethodPost, base+"/"+first.ID+"/resolve", res); a.status != http.StatusOK {
		t.Fatalf("resolve = %d %s", a.status, a.raw)
	}
	// Deleting stores a tombstone child of the winner; an edit naming the
	// tombstone is refused (undoing a delete is a resolution).
	if a = ts.do(t, http.MethodDelete, base+"/"+first.ID, ""); a.status != http.StatusNoContent {
		t.Fatalf("delete = %d %s", a.status, a.raw)
	}
	ts.do(t, http.MethodGet, base+"/"+first.ID+"/history", "").decode(t, &h)
	var tomb capture.Capture
	for _, r := range h.Revisions {
		if r.Revision.Deleted {
			tomb = r
		}
	}
	if tomb.Revision.ID == "" || len(h.Revisions) != 6 || h.Conflict {
		t.Fatalf("delete made no tombstone revision: %+v", h)
	}
	tomb.Revision.Deleted = false
	tj, _ := json.Marshal(tomb)
	if a = ts.do(t, http.MethodPut, base+"/"+first.ID, string(tj)); a.status != http.StatusConflict {
		t.Errorf("edit of a deletion = %d %s, want 409", a.status, a.raw)
	}
}

// CloseSync closes the sync engine only if a request opened it: closing a
// server that never synced must not open the engine now (opening versions
// every record written without sync) nor leave a feed mark; after a sync
// it writes the feed mark to disk, and a second call does nothing.
func TestCloseSync(t *testing.T) {
	ts := newTestServer(t, nil)
	mark := ts.store.Path() + ".feedmark"
	if err := ts.srv.CloseSync(); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(mark); !errors.Is(err, fs.ErrNotExist) {
		t.Fatalf("closing a server that never synced left a feed mark (%v)", err)
	}
	if a := ts.do(t, http.MethodGet, "/api/v1/sync", ""); a.status != http.StatusOK {
		t.Fatalf("GET /api/v1/sync: %d %s", a.status, a.raw)
	}
	for i := 0; i < 2; i++ {
		if err := ts.srv.CloseSync(); err != nil {
			t.Fatalf("close %d: %v", i+1, err)
		}
	}
	if _, err := os.Stat(mark); err != nil {
		t.Errorf("after a sync and CloseSync: %v, want the feed mark", err)
	}
}
