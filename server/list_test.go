package server

import (
	"fmt"
	"net/url"
	"strings"
	"testing"

	"tagtally/capture"
	"tagtally/demo"
)

// pageAll follows next_cursor from the first page to the last and returns
// every record and the number of pages.
func (ts *testServer) pageAll(t *testing.T, query url.Values) ([]capture.Capture, int) {
	t.Helper()
	var all []capture.Capture
	pages := 0
	for cursor := ""; ; {
		q := url.Values{}
		for k, v := range query {
			q[k] = v
		}
		if cursor != "" {
			q.Set("cursor", cursor)
		}
		a := ts.do(t, "GET", "/api/v1/studies/"+demo.StudyID+"/captures?"+q.Encode(), "")
		if a.status != 200 {
			t.Fatalf("list %v = %d %s", q, a.status, a.raw)
		}
		var p capturePage
		a.decode(t, &p)
		all = append(all, p.Captures...)
		pages++
		if p.NextCursor == "" {
			return all, pages
		}
		if pages > 1000 {
			t.Fatal("paging does not end")
		}
		cursor = p.NextCursor
	}
}

// TestListPagingAndFilters lists the demo study through the API and checks
// each filter against a count made directly from demo.Build().
func TestListPagingAndFilters(t *testing.T) {
	ts := newTestServer(t, nil)
	if _, err := demo.Load(ts.store); err != nil {
		t.Fatal(err)
	}
	_, want := demo.Build()

	all, pages := ts.pageAll(t, url.Values{"limit": {"40"}})
	if len(all) != len(want) {
		t.Fatalf("paged through %d records, want %d", len(all), len(want))
	}
	if wantPages := (len(want) + 39) / 40; pages != wantPages {
		t.Errorf("%d pages of 40, want %d", pages, wantPages)
	}
	seen := map[string]bool{}
	for _, c := range all {
		if seen[c.ID] {
			t.Fatalf("record %s on two pages", c.ID)
		}
		seen[c.ID] = true
	}

	// Expected counts, computed from the demo records themselves.
	count := func(keep func(capture.Capture) bool) int {
		n := 0
		for _, c := range want {
			if keep(c) {
				n++
			}
		}
		return n
	}
	var retag, ghost capture.Capture
	for _, c := range want {
		if c.Event == capture.EventRetag && retag.ID == "" {
			retag = c
		}
		if c.TagID == demo.UnknownTag {
			ghost = c
		}
	}
	ghostQuery := url.Values{"occasion": {fmt.Sprint(ghost.Occasion)}, "station": {ghost.StationID}}
	tests := []struct {
		query url.Values
		keep  func(capture.Capture) bool
	}{
		{url.Values{"occasion": {"3"}}, func(c capture.Capture) bool { return c.Occasion == 3 }},
		{url.Values{"station": {"D4"}}, func(c capture.Capture) bool { return c.StationID == "D4" }},
		// A retag's old tag finds the retag record too, so one animal's
		// records come back under either tag.
		{url.Values{"tag": {retag.OldTagID}}, func(c capture.Capture) bool { return c.TagID == retag.OldTagID || c.OldTagID == retag.OldTagID }},
		{url.Values{"species": {strings.ToUpper(demo.Species)}}, func(c capture.Capture) bool { return true }},
		{url.Values{"species": {"Sorex araneus"}}, func(c capture.Capture) bool { return false }},
		{ghostQuery, func(c capture.Capture) bool { return c.Occasion == ghost.Occasion && c.StationID == ghost.StationID }},
	}
	for _, tc := range tests {
		t.Run(tc.query.Encode(), func(t *testing.T) {
			q := url.Values{"limit": {"7"}}
			for k, v := range tc.query {
				q[k] = v
			}
			got, _ := ts.pageAll(t, q)
			if n := count(tc.keep); len(got) != n {
				t.Errorf("%d records, want %d", len(got), n)
			}
			for _, c := range got {
				if !tc.keep(c) {
					t.Errorf("record %s (%s, occasion %d, station %s) does not match", c.ID, c.TagID, c.Occasion, c.StationID)
				}
			}
		})
	}

	// Deleting one record takes it out of every list.
	if a := ts.do(t, "DELETE", fmt.Sprintf("/api/v1/studies/%s/captures/%s", demo.StudyID, all[0].ID), ""); a.status != 204 {
		t.Fatalf("delete = %d", a.status)
	}
	if after, _ := ts.pageAll(t, url.Values{"limit": {"500"}}); len(after) != len(want)-1 {
		t.Errorf("%d records after one delete, want %d", len(after), len(want)-1)
	}
	if with, _ := ts.pageAll(t, url.Values{"deleted": {"true"}, "limit": {"500"}}); len(with) != len(want) {
		t.Errorf("%d records with deleted=true, want %d", len(with), len(want))
	}
}
