package server

import (
	"encoding/json"
	"fmt"
	"net/http"
	"net/http/httptest"
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
