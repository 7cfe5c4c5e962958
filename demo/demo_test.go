package demo

import (
	"reflect"
	"testing"

	"github.com/google/uuid"

	"tagtally/capture"
	"tagtally/capture/storetest"
)

func TestBuildIsDeterministic(t *testing.T) {
	st1, c1 := Build()
	st2, c2 := Build()
	if !reflect.DeepEqual(st1, st2) || !reflect.DeepEqual(c1, c2) {
		t.Fatal("two calls of Build gave different studies or records")
	}
}

// TestBuildValidates checks that every demo record passes validation (the
// deliberate problems are soft findings, never rejections) and that the
// findings the problems should raise are raised exactly where planted.
func TestBuildValidates(t *testing.T) {
	st, caps := Build()
	if err := st.Validate(); err != nil {
		t.Fatalf("demo study does not validate: %v", err)
	}
	found := map[string]int{}
	for i := range caps {
		c := caps[i]
		derived := c
		capture.DeriveOccasion(st, &derived)
		if derived.Occasion != c.Occasion {
			t.Errorf("record %d: occasion %d, but its time %s falls in occasion %d", i, c.Occasion, c.CapturedAt, derived.Occasion)
		}
		fs, err := capture.ValidateCapture(st, &c)
		if err != nil {
			t.Fatalf("record %d (%s) rejected: %v", i, c.TagID, err)
		}
		for _, f := range fs {
			found[f.Code]++
		}
	}
	// One mass slip, one missing station; nothing else is wrong with a
	// single record taken alone.
	want := map[string]int{capture.FindingMassRange: 1, capture.FindingNoStation: 1}
	if !reflect.DeepEqual(found, want) {
		t.Errorf("findings = %v, want %v", found, want)
	}
}

func TestBuildScenario(t *testing.T) {
	st, caps := Build()
	if len(st.Stations) != GridSide*GridSide || len(st.Occasions) != Occasions {
		t.Fatalf("%d stations and %d occasions, want %d and %d", len(st.Stations), len(st.Occasions), GridSide*GridSide, Occasions)
	}
	ids := map[string]bool{}
	marked := map[string]bool{}
	var retags, losses int
	notes := map[string]int{}
	perOccasion := make([]int, Occasions+1)
	for i, c := range caps {
		u, err := uuid.Parse(c.ID)
		if err != nil || u.Version() != 7 {
			t.Fatalf("record %d: ID %q is not a version-7 UUID", i, c.ID)
		}
		if ids[c.ID] {
			t.Fatalf("record %d: ID %q used twice", i, c.ID)
		}
		ids[c.ID] = true
		if i > 0 && c.CapturedAt.Before(caps[i-1].CapturedAt) {
			t.Fatalf("records not sorted by time at %d", i)
		}
		switch c.Event {
		case capture.EventNewMark:
			marked[c.TagID] = true
		case capture.EventRetag:
			retags++
			if !marked[c.OldTagID] {
				t.Errorf("retag of %s, which was never marked", c.OldTagID)
			}
			marked[c.TagID] = true
		}
		if c.Fate == capture.FateDied || c.Fate == capture.FateRemoved {
			losses++
		}
		notes[c.Notes]++
		perOccasion[c.Occasion]++
	}
	// "About 150 animals": the grid should catch most but not all of the
	// simulated population.
	if n := len(marked) - retags; n < 125 || n > 165 || n >= TrueN {
		t.Errorf("%d animals marked; want about 150 and fewer than the %d simulated", n, TrueN)
	}
	if retags < 2 || losses < 1 {
		t.Errorf("%d retags and %d losses on capture; the scenario needs a few of each", retags, losses)
	}
	if marked[UnknownTag] {
		t.Errorf("%s was marked; it should be the never-marked tag", UnknownTag)
	}
	for _, n := range []string{NoteUnknownTag, NoteNoStation, NoteHeavy, NoteDuplicate, NoteSexFlip} {
		if notes[n] != 1 {
			t.Errorf("note %q on %d records, want 1", n, notes[n])
		}
	}
	for k := 1; k <= Occasions; k++ {
		// 64 single-catch traps: a night fills some traps, never all.
		if perOccasion[k] < 10 || perOccasion[k] > GridSide*GridSide+2 {
			t.Errorf("occasion %d has %d records", k, perOccasion[k])
		}
	}
	if perOccasion[0] != 0 {
		t.Errorf("%d records outside every occasion", perOccasion[0])
	}
}

// TestSexFlipIsDetectable checks the planted sex conflict is there: one
// tag recorded as both female and male.
func TestSexFlipIsDetectable(t *testing.T) {
	_, caps := Build()
	sexes := map[string]map[capture.Sex]bool{}
	for _, c := range caps {
		if sexes[c.TagID] == nil {
			sexes[c.TagID] = map[capture.Sex]bool{}
		}
		sexes[c.TagID][c.Sex] = true
	}
	var both int
	for _, s := range sexes {
		if s[capture.SexFemale] && s[capture.SexMale] {
			both++
		}
	}
	if both != 1 {
		t.Errorf("%d tags recorded as both sexes, want 1", both)
	}
}

func TestLoadIsIdempotent(t *testing.T) {
	s := storetest.Open(t)
	_, caps := Build()
	n, err := Load(s)
	if err != nil || n != len(caps) {
		t.Fatalf("first Load = %d, %v; want %d, nil", n, err, len(caps))
	}
	// A coordinator deletes one demo record; loading again must neither
	// bring it back to life nor add anything.
	if err := s.DeleteCapture(StudyID, caps[0].ID); err != nil {
		t.Fatal(err)
	}
	if n, err := Load(s); err != nil || n != 0 {
		t.Fatalf("second Load = %d, %v; want 0, nil", n, err)
	}
	stored, err := s.Captures(StudyID, true)
	if err != nil || len(stored) != len(caps) {
		t.Fatalf("%d records stored (%v), want %d", len(stored), err, len(caps))
	}
	if c, _ := s.GetCapture(StudyID, caps[0].ID); !c.Revision.Deleted {
		t.Error("Load revived a deleted record")
	}
}

// TestLoadRaisesPlantedFindings checks that the store flags the planted
// never-marked recapture when the records are stored.
func TestLoadRaisesPlantedFindings(t *testing.T) {
	s := storetest.Open(t)
	st, caps := Build()
	if err := s.CreateStudy(st); err != nil {
		t.Fatal(err)
	}
	fs, err := s.PutCaptures(caps)
	if err != nil {
		t.Fatal(err)
	}
	var never []string
	for i, f := range fs {
		if f.Has(capture.FindingNeverMarked) {
			never = append(never, caps[i].TagID)
		}
	}
	if len(never) != 1 || never[0] != UnknownTag {
		t.Errorf("never-marked findings on %v, want only %s", never, UnknownTag)
	}
}
