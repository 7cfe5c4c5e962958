package server

import (
	"bytes"
	"encoding/json"
	"net/http"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"tagtally/capture"
	"tagtally/capture/storetest"
	"tagtally/demo"
	tsync "tagtally/sync"
)

// makeConflict produces an edit conflict the way the field does: a record
// made on the server reaches a second replica (a phone's store, here a
// second data file with its own sync engine), both edit it before hearing
// of the other's edit, and the phone's edit is pushed to the server. It
// returns the record's ID.
func makeConflict(t *testing.T, ds *demoServer) string {
	t.Helper()
	engA, err := ds.srv.engine()
	if err != nil {
		t.Fatal(err)
	}
	st, err := ds.store.GetStudy(demo.StudyID)
	if err != nil {
		t.Fatal(err)
	}
	storeB := storetest.Open(t)
	if err := storeB.CreateStudy(st); err != nil {
		t.Fatal(err)
	}
	engB, err := tsync.Open(storeB, &tsync.Options{Device: "phone-tobiah", FeedMarkPath: filepath.Join(t.TempDir(), "b.feedmark")})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { engB.Close() })

	m := 24.5
	rec := &capture.Capture{
		StudyID: demo.StudyID, TagID: "QH-0900", Event: capture.EventNewMark, StationID: "D5",
		Species: demo.Species, Sex: capture.SexFemale, Age: capture.AgeAdult, MassG: &m,
		Fate: capture.FateReleased, Observer: "Tobiah Quell", Device: "phone-tobiah",
		CapturedAt: time.Date(2026, 6, 12, 7, 10, 0, 0, time.UTC),
	}
	first, _, err := engA.Create(rec)
	if err != nil {
		t.Fatal(err)
	}
	if res, err := engB.ApplyRemote([]*capture.Capture{first}, "camp"); err != nil || !res[0].Confirmed() {
		t.Fatalf("copy to the phone: %v %+v", err, res)
	}
	// The phone corrects the mass; the coordinator, at the same time,
	// corrects the sex.
	onPhone := *first
	m2 := 23.0
	onPhone.MassG, onPhone.Notes = &m2, "weighed again without the bag"
	phoneRev, _, err := engB.Update(&onPhone)
	if err != nil {
		t.Fatal(err)
	}
	atCamp := *first
	atCamp.Sex = capture.SexMale
	if _, _, err := engA.Update(&atCamp); err != nil {
		t.Fatal(err)
	}
	res, err := engA.ApplyRemote([]*capture.Capture{phoneRev}, "phone-tobiah")
	if err != nil || !res[0].Confirmed() || !res[0].Conflict {
		t.Fatalf("push of the phone's edit: %v %+v", err, res)
	}
	return first.ID
}

func TestConflictsListAndResolve(t *testing.T) {
	ds := newDemoServer(t)
	var none struct {
		Conflicts []conflictRow `json:"conflicts"`
	}
	ds.getJSON(t, "/api/v1/studies/"+demo.StudyID+"/conflicts", &none)
	if len(none.Conflicts) != 0 {
		t.Fatalf("demo has %d conflicts before any edit", len(none.Conflicts))
	}
	id := makeConflict(t, ds)
	var got struct {
		Conflicts []conflictRow `json:"conflicts"`
	}
	ds.getJSON(t, "/api/v1/studies/"+demo.StudyID+"/conflicts", &got)
	if len(got.Conflicts) != 1 || got.Conflicts[0].Capture.ID != id || len(got.Conflicts[0].Leaves) != 2 {
		t.Fatalf("conflicts: %+v", got.Conflicts)
	}
	var masses []float64
	leaves := []string{}
	var phone capture.Capture
	for _, l := range got.Conflicts[0].Leaves {
		masses = append(masses, *l.MassG)
		leaves = append(leaves, l.Revision.ID)
		if l.Notes != "" {
			phone = l
		}
	}
	if phone.Notes == "" || len(masses) != 2 || masses[0] == masses[1] {
		t.Fatalf("the two versions are not side by side: %+v", got.Conflicts[0].Leaves)
	}
	// The conflict is a data check too.
	var checks checksAnswer
	ds.getJSON(t, "/api/v1/studies/"+demo.StudyID+"/checks", &checks)
	if checks.Counts[capture.CheckEditConflict] != 1 {
		t.Errorf("edit conflict checks: %d, want 1", checks.Counts[capture.CheckEditConflict])
	}
	// Devices count the record's conflict against the phone that made it.
	var devs struct {
		Devices []deviceRow `json:"devices"`
	}
	ds.getJSON(t, "/api/v1/studies/"+demo.StudyID+"/devices", &devs)
	for _, d := range devs.Devices {
		want := 0
		if d.Device == "phone-tobiah" {
			want = 1
			if d.LastPush == nil || d.Stored != 1 {
				t.Errorf("phone-tobiah's pushes: last %v stored %d, want one stored", d.LastPush, d.Stored)
			}
		}
		if d.Conflicts != want {
			t.Errorf("device %s: %d conflicts, want %d", d.Device, d.Conflicts, want)
		}
	}

	// Choose the phone's version: a new version whose parents are both
	// leaves; the conflict is gone and every version stays in history.
	body, _ := json.Marshal(map[string]any{"leaves": leaves, "capture": phone})
	resp, err := ds.Client().Post(ds.URL+"/api/v1/studies/"+demo.StudyID+"/captures/"+id+"/resolve", "application/json", bytes.NewReader(body))
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != http.StatusOK {
		t.Fatalf("resolve: %d", resp.StatusCode)
	}
	ds.getJSON(t, "/api/v1/studies/"+demo.StudyID+"/conflicts", &got)
	if len(got.Conflicts) != 0 {
		t.Errorf("still %d conflicts after resolving", len(got.Conflicts))
	}
	stored, err := ds.store.GetCapture(demo.StudyID, id)
	if err != nil || *stored.MassG != 23.0 || len(stored.Revision.Parents) != 2 {
		t.Errorf("resolved record: mass %v parents %v err %v", stored.MassG, stored.Revision.Parents, err)
	}
}

func TestDevices(t *testing.T) {
	ds := newDemoServer(t)
	var got struct {
		StudyID string      `json:"study_id"`
		Devices []deviceRow `json:"devices"`
	}
	ds.getJSON(t, "/api/v1/studies/"+demo.StudyID+"/devices", &got)
	_, caps := demo.Build()
	want := map[string]int{}
	for _, c := range caps {
		want[c.Device]++
	}
	if len(got.Devices) != len(want) {
		t.Fatalf("%d devices, want %d", len(got.Devices), len(want))
	}
	for i, d := range got.Devices {
		if d.Records != want[d.Device] || d.FirstCapture == nil || d.LastCapture == nil || len(d.Observers) != 1 {
			t.Errorf("device %+v, want %d records", d, want[d.Device])
		}
		if i > 0 && d.Records > got.Devices[i-1].Records {
			t.Error("devices are not busiest first")
		}
		if d.LastPush != nil {
			t.Errorf("device %s has a push time but never pushed", d.Device)
		}
	}
}

func TestCoordinatorUnknownStudy(t *testing.T) {
	ds := newDemoServer(t)
	for _, p := range []string{"devices", "conflicts"} {
		resp, err := ds.Client().Get(ds.URL + "/api/v1/studies/no-such-study/" + p)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		if resp.StatusCode != http.StatusNotFound {
			t.Errorf("%s of a missing study: %d, want 404", p, resp.StatusCode)
		}
	}
}

// The coordinator's pages are served at /coord/ from the embedded app;
// unknown API paths keep their JSON 404.
func TestAppFilesServed(t *testing.T) {
	ds := newDemoServer(t)
	for _, tc := range []struct {
		path, wantType, cache string
		status                int
	}{
		{"/coord/", "text/html", "no-cache", http.StatusOK},
		{"/coord/coord.js", "text/javascript", "", http.StatusOK},
		{"/", "text/html", "no-cache", http.StatusOK},
		{"/api/v1/no-such-thing", "application/json", "", http.StatusNotFound},
		{"/coord/no-such-file.js", "", "", http.StatusNotFound},
	} {
		resp, err := ds.Client().Get(ds.URL + tc.path)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		if resp.StatusCode != tc.status || !strings.HasPrefix(resp.Header.Get("Content-Type"), tc.wantType) ||
			(tc.cache != "" && resp.Header.Get("Cache-Control") != tc.cache) {
			t.Errorf("GET %s: %d %q %q", tc.path, resp.StatusCode, resp.Header.Get("Content-Type"), resp.Header.Get("Cache-Control"))
		}
	}
}
