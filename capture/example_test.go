package capture_test

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"time"

	"tagtally/capture"
)

func Example() {
	dir, _ := os.MkdirTemp("", "tagtally-example")
	defer os.RemoveAll(dir)
	s, err := capture.Open(filepath.Join(dir, "field.db"), capture.DefaultOptions)
	if err != nil {
		fmt.Println(err)
		return
	}
	defer s.Close()

	day := func(d int) time.Time { return time.Date(2025, 5, d, 6, 0, 0, 0, time.UTC) }
	st := &capture.Study{
		ID: "ridge-2025", Name: "Ridgeback Hollow lizards", Design: capture.DesignClosed,
		TagSeries: []capture.TagSeries{{Name: "toe-clip code", Pattern: `R[0-9]{3}`}},
		Occasions: []capture.Occasion{
			{Index: 1, Start: day(1), End: day(2)},
			{Index: 2, Start: day(2), End: day(3)},
		},
	}
	if err := s.CreateStudy(st); err != nil {
		fmt.Println(err)
		return
	}
	rec := &capture.Capture{StudyID: "ridge-2025", TagID: "R017", Event: capture.EventRecapture, CapturedAt: day(2).Add(3 * time.Hour)}
	stored, findings, err := s.CreateCapture(rec)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println("occasion", stored.Occasion)
	for _, f := range findings {
		fmt.Println("finding:", f.Code, f.Field)
	}

	rec.TagID = "R17"
	_, _, err = s.CreateCapture(rec)
	var ve *capture.ValidationError
	if errors.As(err, &ve) {
		fmt.Println("rejected:", ve.Field)
	}
	// Output:
	// occasion 2
	// finding: never_marked tag_id
	// rejected: tag_id
}

func ExampleHistorySet_MArray() {
	h, err := capture.ReadHistoryCSV(strings.NewReader(
		"id,history,removed\n" +
			"A,1101,0\n" +
			"B,1010,0\n" +
			"C,0110,1\n" +
			"D,0011,0\n"))
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, o := range h.Summary() {
		fmt.Printf("occasion %d: n=%d m=%d u=%d l=%d R=%d M=%d\n", o.Occasion, o.Caught, o.Marked, o.New, o.Losses, o.Released, o.MarkedAtLarge)
	}
	m := h.MArray()
	for i, row := range m.Next {
		fmt.Printf("R_%d=%d m=%v never=%d\n", i+1, m.Released[i], row[i+1:], m.NeverRecaptured[i])
	}
	// Output:
	// occasion 1: n=2 m=0 u=2 l=0 R=2 M=0
	// occasion 2: n=2 m=1 u=1 l=0 R=2 M=2
	// occasion 3: n=3 m=2 u=1 l=1 R=2 M=3
	// occasion 4: n=2 m=2 u=0 l=0 R=2 M=3
	// R_1=2 m=[1 1 0] never=0
	// R_2=2 m=[1 1] never=0
	// R_3=2 m=[1] never=1
}

func ExampleBuildHistories() {
	day := func(d int) time.Time { return time.Date(2025, 5, d, 6, 0, 0, 0, time.UTC) }
	st := &capture.Study{ID: "s", Name: "retag demo", Design: capture.DesignOpen}
	for i := 1; i <= 4; i++ {
		st.Occasions = append(st.Occasions, capture.Occasion{Index: i, Start: day(i), End: day(i + 1)})
	}
	caps := []capture.Capture{
		{StudyID: "s", TagID: "A1", Event: capture.EventNewMark, CapturedAt: day(1)},
		{StudyID: "s", TagID: "B7", OldTagID: "A1", Event: capture.EventRetag, CapturedAt: day(3)},
		{StudyID: "s", TagID: "B7", Event: capture.EventRecapture, CapturedAt: day(4), Fate: capture.FateRemoved},
		{StudyID: "s", TagID: "A2", Event: capture.EventNewMark, CapturedAt: day(2)},
		{StudyID: "s", TagID: "A2", Event: capture.EventDeadRecovery, CapturedAt: day(4)},
	}
	h, _ := capture.BuildHistories(st, caps, nil)
	for _, a := range h.Animals {
		fmt.Println(a.ID, a.Tags, a.String(), "removed:", a.Removed, "found dead:", a.Recovered)
	}
	// Output:
	// A1 [A1 B7] 1011 removed: true found dead: false
	// A2 [A2] 0100 removed: false found dead: true
}
