package export

import (
	"fmt"
	"strings"

	"tagtally/capture"
	tsync "tagtally/sync"
)

// SyncWriter returns the write function Import takes, storing records as
// first revisions through the sync engine, all in one transaction, so
// imported records reach phones and other servers like any other. source
// names the import in the revision stamps (e.g. "import:ledger-2019.csv").
//
// A record imported before gets the same revision ID again (the ID is a
// hash of the body, and a first revision has no parents), so re-importing
// a file stores nothing new; an imported record since edited keeps its
// edit.
func SyncWriter(eng *tsync.Engine, source string) func([]capture.Capture) error {
	return func(cs []capture.Capture) error {
		revs := make([]*capture.Capture, len(cs))
		for i := range cs {
			c := cs[i]
			c.Revision = capture.Revision{
				Stamp:   eng.Clock().Now().String(),
				Device:  source,
				Deleted: cs[i].Revision.Deleted,
			}
			revs[i] = &c
		}
		res, err := eng.ApplyRemote(revs, source)
		if err != nil {
			return err
		}
		var bad []string
		for _, r := range res {
			if !r.Confirmed() {
				bad = append(bad, fmt.Sprintf("%s: %s", r.CaptureID, r.Reason))
			}
		}
		if len(bad) > 0 {
			return fmt.Errorf("%d records refused by the store: %s", len(bad), strings.Join(bad, "; "))
		}
		return nil
	}
}
