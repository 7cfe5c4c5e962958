package capture_test

import (
	"fmt"
	"testing"
	"time"

	"tagtally/capture"
	"tagtally/capture/storetest"
)

// benchRecords makes n records of storetest.Study: animals of five
// captures each over the five occasions, with every 50th animal's second
// record a recapture of an unmarked tag, so the checks have findings.
func benchRecords(n int) []capture.Capture {
	out := make([]capture.Capture, 0, n)
	for i := 0; len(out) < n; i++ {
		tag := fmt.Sprintf("BF-%04d", i%10000)
		for occ := 1; occ <= 5 && len(out) < n; occ++ {
			ev := capture.EventRecapture
			if occ == 1 {
				ev = capture.EventNewMark
			}
			c := chk(len(out)+1, tag, ev, occ, i%600, nil)
			if i%50 == 0 && occ == 2 {
				c.TagID = fmt.Sprintf("BF-%04d", 9999-i%10000)
			}
			c.CapturedAt = c.CapturedAt.Add(time.Duration(i) * time.Second)
			out = append(out, c)
		}
	}
	return out
}

// BenchmarkRunChecks runs every check over 1,000 and 10,000 records;
// compare the two times as a ratio (about 10 means linear work).
func BenchmarkRunChecks(b *testing.B) {
	for _, n := range []int{1000, 10000} {
		caps := benchRecords(n)
		st := storetest.Study()
		b.Run(fmt.Sprintf("records=%d", n), func(b *testing.B) {
			for b.Loop() {
				if len(capture.RunChecks(st, caps)) == 0 {
					b.Fatal("no checks found")
				}
			}
		})
	}
}
