package capture_test

import (
	"fmt"
	"reflect"
	"strings"
	"testing"
	"time"

	"tagtally/capture"
	"tagtally/capture/storetest"
)

// The check tests use storetest.Study (five daily occasions from
// 2025-06-02 18:00 UTC, 14 hours each; stations A1 A2 B1 B2; bank vole
// 10-45 g) and records made by chk, whose IDs say what they are for.

// chkTime is minute m of occasion occ (20:00 plus m minutes).
func chkTime(occ, m int) time.Time {
	return time.Date(2025, 6, 2, 20, m, 0, 0, time.UTC).Add(time.Duration(occ-1) * 24 * time.Hour)
}

// chk makes a valid released bank-vole capture by phone-a at A1; edit
// changes it. Its ID is a fixed UUID numbered by n so tests can name it.
func chk(n int, tag string, ev capture.Event, occ, minute int, edit func(*capture.Capture)) capture.Capture {
	m := 20.0
	c := capture.Capture{
		ID:      fmt.Sprintf("00000000-0000-7000-8000-%012d", n),
		StudyID: "fen-grid-2025", TagID: tag, Event: ev, StationID: "A1",
		Species: "bank vole", Sex: capture.SexFemale, Age: capture.AgeAdult, MassG: &m,
		Fate: capture.FateReleased, Device: "phone-a", CapturedAt: chkTime(occ, minute),
	}
	if edit != nil {
		edit(&c)
	}
	return c
}

func id(n int) string { return fmt.Sprintf("00000000-0000-7000-8000-%012d", n) }

// found is a check reduced to what the tests compare.
type found struct {
	code string
	ids  []string
	tags []string
}

func summarise(cs []capture.Check) []found {
	out := make([]found, len(cs))
	for i, c := range cs {
		out[i] = found{c.Code, c.CaptureIDs, c.Tags}
	}
	return out
}

func TestRunChecksEachCheck(t *testing.T) {
	retag := func(old string) func(*capture.Capture) {
		return func(c *capture.Capture) { c.OldTagID = old }
	}
	stamp := func(at time.Time) string { return fmt.Sprintf("%012x%08x-phone-b", at.UnixMilli(), 0) }
	cases := []struct {
		name string
		caps []capture.Capture
		want []found
	}{
		{"clean animal with a retag", []capture.Capture{
			chk(1, "BF-0001", capture.EventNewMark, 1, 0, nil),
			chk(2, "BF-0002", capture.EventRetag, 2, 0, retag("BF-0001")),
			chk(3, "BF-0002", capture.EventRecapture, 3, 0, nil),
		}, []found{}},
		{"recapture never marked", []capture.Capture{
			chk(1, "BF-0001", capture.EventNewMark, 1, 0, nil),
			chk(2, "BF-0009", capture.EventRecapture, 2, 0, nil),
		}, []found{{capture.CheckNeverMarked, []string{id(2)}, []string{"BF-0009"}}}},
		{"recapture before the mark", []capture.Capture{
			chk(1, "BF-0001", capture.EventRecapture, 1, 0, nil),
			chk(2, "BF-0001", capture.EventNewMark, 2, 0, nil),
		}, []found{{capture.CheckNeverMarked, []string{id(1)}, []string{"BF-0001"}}}},
		{"retag of a tag never marked", []capture.Capture{
			chk(1, "BF-0002", capture.EventRetag, 1, 0, retag("BF-0001")),
			chk(2, "BF-0002", capture.EventRecapture, 2, 0, nil),
		}, []found{{capture.CheckNeverMarked, []string{id(1), id(2)}, []string{"BF-0001", "BF-0002"}}}},
		{"resight and dead recovery never marked", []capture.Capture{
			chk(1, "BF-0005", capture.EventResight, 1, 0, nil),
			chk(2, "BF-0005", capture.EventDeadRecovery, 4, 0, func(c *capture.Capture) { c.Fate = capture.FateDied }),
		}, []found{{capture.CheckNeverMarked, []string{id(1), id(2)}, []string{"BF-0005"}}}},
		{"marked twice", []capture.Capture{
			chk(1, "BF-0001", capture.EventNewMark, 1, 0, nil),
			chk(2, "BF-0001", capture.EventNewMark, 3, 0, nil),
		}, []found{{capture.CheckMarkedTwice, []string{id(1), id(2)}, []string{"BF-0001"}}}},
		{"new mark of a tag already given by a retag", []capture.Capture{
			chk(1, "BF-0001", capture.EventNewMark, 1, 0, nil),
			chk(2, "BF-0002", capture.EventRetag, 2, 0, retag("BF-0001")),
			chk(3, "BF-0002", capture.EventNewMark, 4, 0, nil),
		}, []found{{capture.CheckMarkedTwice, []string{id(1), id(3)}, []string{"BF-0001", "BF-0002"}}}},
		{"sex changes across a retag", []capture.Capture{
			chk(1, "BF-0001", capture.EventNewMark, 1, 0, nil),
			chk(2, "BF-0002", capture.EventRetag, 2, 0, func(c *capture.Capture) { c.OldTagID = "BF-0001"; c.Sex = capture.SexUnknown }),
			chk(3, "BF-0002", capture.EventRecapture, 3, 0, func(c *capture.Capture) { c.Sex = capture.SexMale }),
		}, []found{{capture.CheckSexChanged, []string{id(1), id(3)}, []string{"BF-0001", "BF-0002"}}}},
		{"species changes (case ignored)", []capture.Capture{
			chk(1, "BF-0001", capture.EventNewMark, 1, 0, nil),
			chk(2, "BF-0001", capture.EventRecapture, 2, 0, func(c *capture.Capture) { c.Species = "Bank Vole" }),
			chk(3, "BF-0001", capture.EventRecapture, 3, 0, func(c *capture.Capture) { c.Species = "wood mouse"; c.MassG = nil }),
		}, []found{{capture.CheckSpeciesChanged, []string{id(1), id(2), id(3)}, []string{"BF-0001"}}}},
		{"age goes backwards; unknown ignored", []capture.Capture{
			chk(1, "BF-0001", capture.EventNewMark, 1, 0, func(c *capture.Capture) { c.Age = capture.AgeJuvenile }),
			chk(2, "BF-0001", capture.EventRecapture, 2, 0, func(c *capture.Capture) { c.Age = capture.AgeAdult }),
			chk(3, "BF-0001", capture.EventRecapture, 3, 0, func(c *capture.Capture) { c.Age = capture.AgeUnknown }),
			chk(4, "BF-0001", capture.EventRecapture, 4, 0, func(c *capture.Capture) { c.Age = capture.AgeJuvenile }),
		}, []found{{capture.CheckAgeBackwards, []string{id(2), id(4)}, []string{"BF-0001"}}}},
		{"juvenile then subadult then adult is fine", []capture.Capture{
			chk(1, "BF-0001", capture.EventNewMark, 1, 0, func(c *capture.Capture) { c.Age = capture.AgeJuvenile }),
			chk(2, "BF-0001", capture.EventRecapture, 2, 0, func(c *capture.Capture) { c.Age = capture.AgeSubadult }),
			chk(3, "BF-0001", capture.EventRecapture, 3, 0, nil),
		}, []found{}},
		{"outside occasions and stations", []capture.Capture{
			chk(1, "BF-0001", capture.EventNewMark, 1, 0, nil),
			// 2025-06-03 12:00 is between occasion 1 (ends 08:00) and 2.
			chk(2, "BF-0001", capture.EventRecapture, 1, 0, func(c *capture.Capture) { c.CapturedAt = time.Date(2025, 6, 3, 12, 0, 0, 0, time.UTC) }),
			chk(3, "BF-0001", capture.EventRecapture, 2, 0, func(c *capture.Capture) { c.Occasion = 9; c.OccasionSetByHand = true }),
			chk(4, "BF-0001", capture.EventRecapture, 3, 0, func(c *capture.Capture) { c.StationID = "Z9" }),
		}, []found{
			{capture.CheckOutsideOccasion, []string{id(2)}, []string{"BF-0001"}},
			{capture.CheckOutsideOccasion, []string{id(3)}, []string{"BF-0001"}},
			{capture.CheckUnknownStation, []string{id(4)}, []string{"BF-0001"}},
		}},
		// The study's series is BF- and four digits (storetest.Study).
		// Its own writes refuse other tags, but phones' records arrive by
		// sync as sent: a digit dropped in typing makes a new "animal".
		{"tag outside the study's series", []capture.Capture{
			chk(1, "BF-0001", capture.EventNewMark, 1, 0, nil),
			chk(2, "BF-001", capture.EventRecapture, 2, 0, nil),
			// A retag's old tag may come from another study: not checked.
			chk(3, "BF-0003", capture.EventNewMark, 1, 5, nil),
			chk(4, "BF-0004", capture.EventRetag, 2, 5, retag("BF-0003")),
			chk(5, "BF-0005", capture.EventRetag, 3, 5, retag("OLD-77")),
		}, []found{
			{capture.CheckNeverMarked, []string{id(2)}, []string{"BF-001"}},
			{capture.CheckNeverMarked, []string{id(5)}, []string{"OLD-77", "BF-0005"}},
			{capture.CheckTagSeries, []string{id(2)}, []string{"BF-001"}},
		}},
		{"hand-set occasion outside its window is not outside the study", []capture.Capture{
			chk(1, "BF-0001", capture.EventNewMark, 1, 0, func(c *capture.Capture) {
				c.CapturedAt = time.Date(2025, 6, 3, 12, 0, 0, 0, time.UTC)
				c.Occasion, c.OccasionSetByHand = 1, true
			}),
		}, []found{}},
		{"likely duplicate from two devices", []capture.Capture{
			chk(1, "BF-0001", capture.EventNewMark, 1, 0, nil),
			chk(2, "BF-0001", capture.EventRecapture, 2, 0, nil),
			chk(3, "BF-0001", capture.EventRecapture, 2, 4, func(c *capture.Capture) { c.Device = "phone-b" }),
		}, []found{{capture.CheckLikelyDuplicate, []string{id(2), id(3)}, []string{"BF-0001"}}}},
		{"two captures on one occasion from one device, and a resight from another, are not duplicates", []capture.Capture{
			chk(1, "BF-0001", capture.EventNewMark, 1, 0, nil),
			chk(2, "BF-0001", capture.EventRecapture, 1, 50, nil),
			chk(3, "BF-0001", capture.EventResight, 1, 55, func(c *capture.Capture) { c.Device = "phone-b" }),
		}, []found{}},
		{"mass out of range, edges and other species", []capture.Capture{
			chk(1, "BF-0001", capture.EventNewMark, 1, 0, func(c *capture.Capture) { m := 10.0; c.MassG = &m }),  // at the minimum: fine
			chk(2, "BF-0002", capture.EventNewMark, 1, 1, func(c *capture.Capture) { m := 45.0; c.MassG = &m }),  // at the maximum: fine
			chk(3, "BF-0003", capture.EventNewMark, 1, 2, func(c *capture.Capture) { m := 215.0; c.MassG = &m }), // slipped decimal
			chk(4, "BF-0004", capture.EventNewMark, 1, 3, func(c *capture.Capture) { m := 9.5; c.MassG = &m }),
			chk(5, "BF-0005", capture.EventNewMark, 1, 4, func(c *capture.Capture) { m := 500.0; c.MassG = &m; c.Species = "stoat" }), // no range set
		}, []found{
			{capture.CheckMassRange, []string{id(3)}, []string{"BF-0003"}},
			{capture.CheckMassRange, []string{id(4)}, []string{"BF-0004"}},
		}},
		{"no station; resights and dead recoveries need none", []capture.Capture{
			chk(1, "BF-0001", capture.EventNewMark, 1, 0, func(c *capture.Capture) { c.StationID = "" }),
			chk(2, "BF-0001", capture.EventResight, 2, 0, func(c *capture.Capture) { c.StationID = "" }),
		}, []found{{capture.CheckNoStation, []string{id(1)}, []string{"BF-0001"}}}},
		{"no time", []capture.Capture{
			chk(1, "BF-0001", capture.EventNewMark, 1, 0, nil),
			chk(2, "BF-0001", capture.EventRecapture, 2, 0, func(c *capture.Capture) { c.CapturedAt = time.Time{} }),
			chk(3, "BF-0001", capture.EventRecapture, 3, 0, func(c *capture.Capture) { c.CapturedAt = time.Time{}; c.Occasion, c.OccasionSetByHand = 3, true }),
		}, []found{
			{capture.CheckNoTime, []string{id(2)}, []string{"BF-0001"}},
			{capture.CheckNoTime, []string{id(3)}, []string{"BF-0001"}},
		}},
		{"clock ahead: captured after the record was written", []capture.Capture{
			chk(1, "BF-0001", capture.EventNewMark, 1, 0, func(c *capture.Capture) { c.Device = "phone-b"; c.Revision.Stamp = stamp(chkTime(1, 1)) }),
			// captured_at is 2 h after the stamp: impossible with one right clock.
			chk(2, "BF-0002", capture.EventNewMark, 1, 120, func(c *capture.Capture) { c.Device = "phone-b"; c.Revision.Stamp = stamp(chkTime(1, 0)) }),
			// 9 minutes ahead is within SkewAhead.
			chk(3, "BF-0003", capture.EventNewMark, 1, 9, func(c *capture.Capture) { c.Device = "phone-b"; c.Revision.Stamp = stamp(chkTime(1, 0)) }),
			// unreadable and missing stamps are skipped.
			chk(4, "BF-0004", capture.EventNewMark, 1, 300, func(c *capture.Capture) { c.Revision.Stamp = "not a stamp at all!!" }),
			chk(5, "BF-0005", capture.EventNewMark, 1, 300, nil),
		}, []found{{capture.CheckClockSkew, []string{id(2)}, []string{"BF-0002"}}}},
		{"clock behind: every record written long after capture", []capture.Capture{
			chk(1, "BF-0001", capture.EventNewMark, 1, 0, func(c *capture.Capture) { c.Revision.Stamp = stamp(chkTime(1, 0).Add(7 * time.Hour)) }),
			chk(2, "BF-0002", capture.EventNewMark, 2, 0, func(c *capture.Capture) { c.Revision.Stamp = stamp(chkTime(2, 0).Add(7 * time.Hour)) }),
			chk(3, "BF-0003", capture.EventNewMark, 3, 0, func(c *capture.Capture) { c.Revision.Stamp = stamp(chkTime(3, 0).Add(8 * time.Hour)) }),
		}, []found{{capture.CheckClockSkew, []string{id(1), id(2), id(3)}, []string{"BF-0001", "BF-0002", "BF-0003"}}}},
		{"records edited later at camp say nothing of the phone's clock", []capture.Capture{
			chk(1, "BF-0001", capture.EventNewMark, 1, 0, func(c *capture.Capture) {
				c.Revision.Stamp = stamp(chkTime(1, 0).Add(7 * time.Hour))
				c.Revision.Device = "camp"
			}),
			chk(2, "BF-0002", capture.EventNewMark, 2, 0, func(c *capture.Capture) {
				c.Revision.Stamp = stamp(chkTime(2, 0).Add(7 * time.Hour))
				c.Revision.Device = "camp"
			}),
			chk(3, "BF-0003", capture.EventNewMark, 3, 0, func(c *capture.Capture) { c.Revision.Stamp = stamp(chkTime(3, 0).Add(8 * time.Hour)) }),
		}, []found{}},
		{"two late records are too few to judge a clock", []capture.Capture{
			chk(1, "BF-0001", capture.EventNewMark, 1, 0, func(c *capture.Capture) { c.Revision.Stamp = stamp(chkTime(1, 0).Add(7 * time.Hour)) }),
			chk(2, "BF-0002", capture.EventNewMark, 2, 0, func(c *capture.Capture) { c.Revision.Stamp = stamp(chkTime(2, 0).Add(7 * time.Hour)) }),
		}, []found{}},
		{"edit conflict", []capture.Capture{
			chk(1, "BF-0001", capture.EventNewMark, 1, 0, func(c *capture.Capture) { c.Revision.Conflict = true }),
		}, []found{{capture.CheckEditConflict, []string{id(1)}, []string{"BF-0001"}}}},
		{"deleted records and other studies are ignored", []capture.Capture{
			chk(1, "BF-0001", capture.EventNewMark, 1, 0, nil),
			chk(2, "BF-0009", capture.EventRecapture, 2, 0, func(c *capture.Capture) { c.Revision.Deleted = true }),
			chk(3, "BF-0008", capture.EventRecapture, 2, 0, func(c *capture.Capture) { c.StudyID = "another-study" }),
		}, []found{}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			got := summarise(capture.RunChecks(storetest.Study(), tc.caps))
			if !reflect.DeepEqual(got, tc.want) {
				t.Errorf("checks:\n got %+v\nwant %+v", got, tc.want)
			}
		})
	}
}

// TestRunChecksFields checks the parts of a Check that the table leaves
// out: the kind's fixed texts, devices, the occasion and the order.
func TestRunChecksFields(t *testing.T) {
	caps := []capture.Capture{
		chk(1, "BF-0001", capture.EventNewMark, 1, 0, func(c *capture.Capture) { c.StationID = "" }),
		chk(2, "BF-0001", capture.EventRecapture, 2, 0, nil),
		chk(3, "BF-0001", capture.EventRecapture, 2, 4, func(c *capture.Capture) { c.Device = "phone-b" }),
		chk(4, "BF-0009", capture.EventRecapture, 3, 0, nil),
	}
	got := capture.RunChecks(storetest.Study(), caps)
	var codes []string
	for _, c := range got {
		codes = append(codes, c.Code)
	}
	// CheckKinds order: never marked first, then duplicates, then no station.
	want := []string{capture.CheckNeverMarked, capture.CheckLikelyDuplicate, capture.CheckNoStation}
	if !reflect.DeepEqual(codes, want) {
		t.Fatalf("codes %v, want %v", codes, want)
	}
	dup := got[1]
	if !reflect.DeepEqual(dup.Devices, []string{"phone-a", "phone-b"}) || dup.Occasion != 2 {
		t.Errorf("duplicate: devices %v occasion %d, want [phone-a phone-b] and 2", dup.Devices, dup.Occasion)
	}
	if dup.Severity != capture.SeverityProblem || dup.AffectsEstimates || dup.Advice == "" || dup.Effect == "" {
		t.Errorf("duplicate kind fields: %+v", dup)
	}
	nm := got[0]
	if !nm.AffectsEstimates || !strings.Contains(nm.Explanation, "BF-0009") || !strings.Contains(nm.Explanation, "no record marks it") {
		t.Errorf("never marked: %+v", nm)
	}
	for _, c := range got {
		if c.Title == "" || c.Explanation == "" || c.Advice == "" || len(c.CaptureIDs) == 0 {
			t.Errorf("check %s has empty parts: %+v", c.Code, c)
		}
	}
	// Pure: the same input gives the same output.
	if again := capture.RunChecks(storetest.Study(), caps); !reflect.DeepEqual(again, got) {
		t.Error("RunChecks is not deterministic")
	}
}

func TestCheckKindsComplete(t *testing.T) {
	seen := map[string]bool{}
	for _, k := range capture.CheckKinds {
		if seen[k.Code] {
			t.Errorf("code %s listed twice", k.Code)
		}
		seen[k.Code] = true
		if k.Title == "" || k.Advice == "" || k.Effect == "" || (k.Severity != capture.SeverityProblem && k.Severity != capture.SeverityCaution) {
			t.Errorf("kind %s is incomplete: %+v", k.Code, k)
		}
	}
	if len(seen) != 14 {
		t.Errorf("%d kinds, want 14", len(seen))
	}
}

func TestStampTime(t *testing.T) {
	at := time.Date(2025, 6, 2, 20, 0, 0, 0, time.UTC)
	for _, tc := range []struct {
		in string
		ok bool
	}{
		{fmt.Sprintf("%012x%08x", at.UnixMilli(), 3), true},
		{fmt.Sprintf("%012x%08x-phone-7", at.UnixMilli(), 0), true},
		{"", false},
		{"0123", false},
		{"ZZZZZZZZZZZZ00000000", false},
	} {
		got, ok := capture.StampTime(tc.in)
		if ok != tc.ok || (ok && !got.Equal(at)) {
			t.Errorf("StampTime(%q) = %v, %v", tc.in, got, ok)
		}
	}
}

func TestStoreChecks(t *testing.T) {
	s := storetest.Open(t)
	if err := s.CreateStudy(storetest.Study()); err != nil {
		t.Fatal(err)
	}
	if _, err := s.Checks("no-such-study"); err == nil {
		t.Error("no error for a missing study")
	}
	caps := []capture.Capture{
		chk(1, "BF-0001", capture.EventNewMark, 1, 0, nil),
		chk(2, "BF-0009", capture.EventRecapture, 2, 0, nil),
	}
	if _, err := s.PutCaptures(caps); err != nil {
		t.Fatal(err)
	}
	got, err := s.Checks("fen-grid-2025")
	if err != nil {
		t.Fatal(err)
	}
	want := []found{{capture.CheckNeverMarked, []string{id(2)}, []string{"BF-0009"}}}
	if !reflect.DeepEqual(summarise(got), want) {
		t.Errorf("got %+v, want %+v", summarise(got), want)
	}
	// Deleting the record clears the check.
	if err := s.DeleteCapture("fen-grid-2025", id(2)); err != nil {
		t.Fatal(err)
	}
	if got, err = s.Checks("fen-grid-2025"); err != nil || len(got) != 0 {
		t.Errorf("after delete: %+v, %v", got, err)
	}
}
