package sync

import (
	"fmt"
	"testing"
	"time"

	"tagtally/capture"
)

const testStudy = "fen-grid-2025"

// body makes a capture body; n varies it.
func body(id string, n int) *capture.Capture {
	return &capture.Capture{
		ID: id, StudyID: testStudy, TagID: fmt.Sprintf("BF-%04d", n%10000), Event: capture.EventNewMark,
		CapturedAt: time.Date(2025, 6, 2, 20, 0, 0, 0, time.UTC), Notes: fmt.Sprintf("note %d", n),
	}
}

// phoneRev builds a revision as a phone would: parents, stamp, ID.
func phoneRev(t testing.TB, c *capture.Capture, parents []string, deleted bool, stamp Stamp) *capture.Capture {
	t.Helper()
	r := cloneCapture(c)
	r.Revision = capture.Revision{Parents: parents, Deleted: deleted, Stamp: stamp.String(), Device: stamp.Device}
	id, err := RevisionID(r, parents, deleted)
	if err != nil {
		t.Fatal(err)
	}
	r.Revision.ID = id
	return r
}

func st(wall int64, dev string) Stamp { return Stamp{Wall: wall, Device: dev} }

// clones copies revisions so that each delivery decodes afresh.
func clones(rs ...*capture.Capture) []*capture.Capture {
	out := make([]*capture.Capture, len(rs))
	for i, r := range rs {
		out[i] = cloneCapture(r)
	}
	return out
}

func mustApply(t testing.TB, e *Engine, source string, rs ...*capture.Capture) []Result {
	t.Helper()
	res, err := e.ApplyRemote(clones(rs...), source)
	if err != nil {
		t.Fatal(err)
	}
	return res
}
