package capture_test

import (
	"errors"
	"math"
	"slices"
	"strings"
	"testing"
	"time"

	"tagtally/capture"
	"tagtally/capture/storetest"
)

func TestValidateCapture(t *testing.T) {
	tests := []struct {
		name  string
		edit  func(c *capture.Capture)
		field string // "" = accepted
		code  string // a finding expected on an accepted record
		// sent: the finding ValidateCaptureAll as sent gives instead of
		// refusing; "" when it answers as ValidateCapture does.
		sent string
	}{
		{"clean new mark", func(c *capture.Capture) {}, "", "", ""},
		{"tag outside the series", func(c *capture.Capture) { c.TagID = "BF-12" }, "tag_id", "", capture.FindingTagFormat},
		{"tag matches only a substring", func(c *capture.Capture) { c.TagID = "xBF-1234" }, "tag_id", "", capture.FindingTagFormat},
		{"tag with trailing space", func(c *capture.Capture) { c.TagID = "BF-1234 " }, "tag_id", "", ""},
		{"tag with a NUL byte", func(c *capture.Capture) { c.TagID = "BF-1\x0034" }, "tag_id", "", ""},
		{"empty tag", func(c *capture.Capture) { c.TagID = "" }, "tag_id", "", ""},
		{"not a UUID", func(c *capture.Capture) { c.ID = "abc" }, "id", "", ""},
		{"another study", func(c *capture.Capture) { c.StudyID = "other" }, "study_id", "", ""},
		{"no event", func(c *capture.Capture) { c.Event = "" }, "event", "", ""},
		{"unknown event", func(c *capture.Capture) { c.Event = "escaped" }, "event", "", ""},
		{"retag without old tag", func(c *capture.Capture) { c.Event = capture.EventRetag }, "old_tag_id", "", ""},
		{"retag to the same tag", func(c *capture.Capture) { c.Event = capture.EventRetag; c.OldTagID = c.TagID }, "old_tag_id", "", ""},
		{"retag from a foreign tag", func(c *capture.Capture) { c.Event = capture.EventRetag; c.OldTagID = "Z9" }, "", capture.FindingOldTagFormat, ""},
		{"old tag on a recapture", func(c *capture.Capture) { c.OldTagID = "BF-0001" }, "old_tag_id", "", ""},
		{"unknown sex", func(c *capture.Capture) { c.Sex = "F" }, "sex", "", ""},
		{"unknown age", func(c *capture.Capture) { c.Age = "old" }, "age", "", ""},
		{"unknown fate", func(c *capture.Capture) { c.Fate = "escaped" }, "fate", "", ""},
		{"dead recovery released", func(c *capture.Capture) { c.Event = capture.EventDeadRecovery }, "fate", "", ""},
		{"no time", func(c *capture.Capture) { c.CapturedAt = time.Time{} }, "captured_at", "", ""},
		{"occasion by hand outside the study", func(c *capture.Capture) { c.Occasion = 6; c.OccasionSetByHand = true }, "occasion", "", ""},
		{"occasion by hand, time outside its window", func(c *capture.Capture) { c.Occasion = 3; c.OccasionSetByHand = true }, "", capture.FindingOutsideWindow, ""},
		{"unknown station", func(c *capture.Capture) { c.StationID = "Z9" }, "station_id", "", ""},
		{"no station", func(c *capture.Capture) { c.StationID = "" }, "", capture.FindingNoStation, ""},
		{"latitude 90.5", func(c *capture.Capture) { c.Lat = fp(90.5) }, "lat", "", ""},
		{"latitude -90 is fine", func(c *capture.Capture) { c.Lat = fp(-90) }, "", "", ""},
		{"longitude 180.01", func(c *capture.Capture) { c.Lon = fp(180.01) }, "lon", "", ""},
		{"longitude -180 is fine", func(c *capture.Capture) { c.Lon = fp(-180) }, "", "", ""},
		{"latitude NaN", func(c *capture.Capture) { c.Lat = fp(math.NaN()) }, "lat", "", ""},
		{"latitude without longitude", func(c *capture.Capture) { c.Lon = nil }, "lat", "", ""},
		{"negative accuracy", func(c *capture.Capture) { c.AccuracyM = fp(-1) }, "accuracy_m", "", ""},
		{"zero accuracy is fine", func(c *capture.Capture) { c.AccuracyM = fp(0) }, "", "", ""},
		{"zero mass", func(c *capture.Capture) { c.MassG = fp(0) }, "mass_g", "", ""},
		{"infinite mass", func(c *capture.Capture) { c.MassG = fp(math.Inf(1)) }, "mass_g", "", ""},
		{"implausible mass", func(c *capture.Capture) { c.MassG = fp(80) }, "", capture.FindingMassRange, ""},
		{"other species", func(c *capture.Capture) { c.Species = "wood mouse" }, "", capture.FindingSpecies, ""},
		{"measurement without name", func(c *capture.Capture) { c.Measurements = []capture.Measurement{{Value: 1}} }, "measurements[0].name", "", ""},
		{"measurement NaN", func(c *capture.Capture) { c.Measurements = []capture.Measurement{{Name: "ear", Value: math.NaN()}} }, "measurements[0].value", "", ""},
		{"huge notes", func(c *capture.Capture) { c.Notes = strings.Repeat("x", 10001) }, "notes", "", ""},
	}
	st := storetest.Study()
	for _, tc := range tests {
		for _, sent := range []bool{false, true} {
			name := tc.name
			validate := capture.ValidateCapture
			if sent {
				name, validate = "as sent/"+name, validateSent
				if tc.sent != "" {
					tc.field, tc.code = "", tc.sent
				}
			}
			t.Run(name, func(t *testing.T) {
				c := newCapture("BF-1234", capture.EventRecapture, 2)
				tc.edit(c)
				capture.DeriveOccasion(st, c)
				fs, err := validate(st, c)
				if tc.field == "" {
					if err != nil {
						t.Fatalf("rejected: %v", err)
					}
					if tc.code != "" && !fs.Has(tc.code) {
						t.Errorf("finding %q missing: %+v", tc.code, fs)
					}
					if tc.code == "" && len(fs) != 0 {
						t.Errorf("unexpected findings: %+v", fs)
					}
					return
				}
				var ve *capture.ValidationError
				if !errors.As(err, &ve) || !errors.Is(err, capture.ErrInvalid) {
					t.Fatalf("got %v, want a ValidationError on %s", err, tc.field)
				}
				if ve.Field != tc.field || ve.Message == "" {
					t.Errorf("rejected on field %q (%s), want %q", ve.Field, ve.Message, tc.field)
				}
			})
		}
	}
}

// validateSent is ValidateCaptureAll as sent, answering as ValidateCapture
// does (the first rejected field).
func validateSent(st *capture.Study, c *capture.Capture) (capture.Findings, error) {
	fs, errs, err := capture.ValidateCaptureAll(st, c, true)
	if err != nil {
		return nil, err
	}
	if len(errs) > 0 {
		return nil, errs[0]
	}
	return fs, nil
}

// Every rejected field is reported, in the order ValidateCapture checks
// them, the first being the one it reports.
func TestValidateCaptureAllListsEveryField(t *testing.T) {
	st := storetest.Study()
	c := newCapture("BF-12", capture.EventRecapture, 2)
	c.StationID, c.Sex, c.MassG = "Z9", "F", fp(-3)
	capture.DeriveOccasion(st, c)
	fs, errs, err := capture.ValidateCaptureAll(st, c, false)
	if err != nil || fs != nil {
		t.Fatalf("findings %+v, error %v", fs, err)
	}
	var fields []string
	for _, e := range errs {
		fields = append(fields, e.Field)
	}
	if want := []string{"tag_id", "sex", "station_id", "mass_g"}; !slices.Equal(fields, want) {
		t.Errorf("rejected fields %v, want %v", fields, want)
	}
	if _, first := capture.ValidateCapture(st, c); first == nil || first.Error() != errs[0].Error() {
		t.Errorf("ValidateCapture reports %v, want the first of ValidateCaptureAll: %v", first, errs[0])
	}
	// As sent, the tag outside the series is a finding and the others
	// are still refused.
	_, errs, _ = capture.ValidateCaptureAll(st, c, true)
	if len(errs) != 3 || errs[0].Field != "sex" {
		t.Errorf("as sent: %v, want sex, station_id and mass_g", errs)
	}
}

func TestDeriveOccasion(t *testing.T) {
	st := storetest.Study() // windows [18:00, 08:00 next day) from 2 June 2025
	for _, tc := range []struct {
		at   time.Time
		want int
	}{
		{time.Date(2025, 6, 2, 18, 0, 0, 0, time.UTC), 1},  // start is inside
		{time.Date(2025, 6, 3, 7, 59, 0, 0, time.UTC), 1},  //
		{time.Date(2025, 6, 3, 8, 0, 0, 0, time.UTC), 0},   // end is outside
		{time.Date(2025, 6, 3, 19, 0, 0, 0, time.UTC), 2},  //
		{time.Date(2025, 6, 7, 5, 0, 0, 0, time.UTC), 5},   //
		{time.Date(2025, 6, 2, 17, 59, 0, 0, time.UTC), 0}, // before the study
		// The same instant in another zone.
		{time.Date(2025, 6, 3, 21, 0, 0, 0, time.FixedZone("UTC+2", 7200)), 2},
	} {
		c := &capture.Capture{CapturedAt: tc.at, Occasion: 9}
		fs := capture.DeriveOccasion(st, c)
		if c.Occasion != tc.want {
			t.Errorf("%v: occasion %d, want %d", tc.at, c.Occasion, tc.want)
		}
		if (tc.want == 0) != fs.Has(capture.FindingNoOccasion) {
			t.Errorf("%v: findings %+v", tc.at, fs)
		}
	}
	c := &capture.Capture{CapturedAt: time.Date(2025, 6, 3, 19, 0, 0, 0, time.UTC), Occasion: 4, OccasionSetByHand: true}
	capture.DeriveOccasion(st, c)
	if c.Occasion != 4 {
		t.Errorf("a hand-set occasion was overwritten: %d", c.Occasion)
	}
}

func TestStudyValidate(t *testing.T) {
	tests := []struct {
		name  string
		edit  func(s *capture.Study)
		field string
	}{
		{"valid", func(s *capture.Study) {}, ""},
		{"no ID", func(s *capture.Study) { s.ID = " " }, "id"},
		{"NUL in ID", func(s *capture.Study) { s.ID = "a\x00b" }, "id"},
		{"no name", func(s *capture.Study) { s.Name = "" }, "name"},
		{"bad design", func(s *capture.Study) { s.Design = "mixed" }, "design"},
		{"bad pattern", func(s *capture.Study) { s.TagSeries[0].Pattern = "BF-[" }, "tag_series[0].pattern"},
		{"negative area", func(s *capture.Study) { s.AreaHectares = -1 }, "area_ha"},
		{"occasion index 0", func(s *capture.Study) { s.Occasions[0].Index = 0 }, "occasions[0].index"},
		{"occasion twice", func(s *capture.Study) { s.Occasions[1].Index = 1 }, "occasions[1].index"},
		{"end before start", func(s *capture.Study) { s.Occasions[2].End = s.Occasions[2].Start.Add(-time.Hour) }, "occasions[2].end"},
		{"start without end", func(s *capture.Study) { s.Occasions[2].End = time.Time{} }, "occasions[2].end"},
		{"overlapping windows", func(s *capture.Study) { s.Occasions[1].Start = s.Occasions[0].End.Add(-time.Hour) }, "occasions"},
		{"untimed occasions", func(s *capture.Study) {
			for i := range s.Occasions {
				s.Occasions[i].Start, s.Occasions[i].End = time.Time{}, time.Time{}
			}
		}, ""},
		{"primary in an open design", func(s *capture.Study) { s.Occasions[0].Primary = 1 }, "occasions[0].primary"},
		{"robust without primary", func(s *capture.Study) { s.Design = capture.DesignRobust }, "occasions[0].primary"},
		{"robust, primaries go back", func(s *capture.Study) {
			s.Design = capture.DesignRobust
			for i, p := range []int{1, 1, 2, 1, 3} {
				s.Occasions[i].Primary = p
			}
		}, "occasions"},
		{"robust ok", func(s *capture.Study) {
			s.Design = capture.DesignRobust
			for i, p := range []int{1, 1, 2, 2, 3} {
				s.Occasions[i].Primary = p
			}
		}, ""},
		{"station twice", func(s *capture.Study) { s.Stations[1].ID = "A1" }, "stations[1].id"},
		{"station kind", func(s *capture.Study) { s.Stations[0].Kind = "cage" }, "stations[0].kind"},
		{"station latitude", func(s *capture.Study) { s.Stations[0].Lat, s.Stations[0].Lon = fp(91), fp(0) }, "stations[0].lat"},
		{"station half a grid point", func(s *capture.Study) { s.Stations[0].GridY = nil }, "stations[0].grid_x_m"},
		{"mass range upside down", func(s *capture.Study) { s.MassRanges[0].MinG = 50 }, "mass_ranges[0]"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			s := storetest.Study()
			tc.edit(s)
			err := s.Validate()
			if tc.field == "" {
				if err != nil {
					t.Fatalf("rejected: %v", err)
				}
				return
			}
			var ve *capture.ValidationError
			if !errors.As(err, &ve) || ve.Field != tc.field {
				t.Errorf("got %v, want a ValidationError on %s", err, tc.field)
			}
		})
	}
}

// TestStoreFindings checks the soft findings that need other records.
func TestStoreFindings(t *testing.T) {
	s := openWithStudy(t)
	create := func(c *capture.Capture) capture.Findings {
		t.Helper()
		_, fs, err := s.CreateCapture(c)
		if err != nil {
			t.Fatal(err)
		}
		return fs
	}
	if fs := create(newCapture("BF-0001", capture.EventRecapture, 2)); !fs.Has(capture.FindingNeverMarked) {
		t.Errorf("recapture of an unmarked tag: %+v", fs)
	}
	if fs := create(newCapture("BF-0002", capture.EventNewMark, 1)); len(fs) != 0 {
		t.Errorf("clean new mark: %+v", fs)
	}
	if fs := create(newCapture("BF-0002", capture.EventRecapture, 2)); len(fs) != 0 {
		t.Errorf("clean recapture: %+v", fs)
	}
	if fs := create(newCapture("BF-0002", capture.EventNewMark, 3)); !fs.Has(capture.FindingAlreadyMarked) {
		t.Errorf("second new mark with one tag: %+v", fs)
	}
	// Retag BF-0002 -> BF-0003 on 3; a recapture of BF-0003 on 4 is then fine.
	retag := newCapture("BF-0003", capture.EventRetag, 3)
	retag.OldTagID = "BF-0002"
	retag.CapturedAt = retag.CapturedAt.Add(time.Minute)
	if fs := create(retag); len(fs) != 0 {
		t.Errorf("clean retag: %+v", fs)
	}
	if fs := create(newCapture("BF-0003", capture.EventRecapture, 4)); len(fs) != 0 {
		t.Errorf("recapture under the new tag: %+v", fs)
	}
	// A retag from a tag nobody marked.
	retag2 := newCapture("BF-0005", capture.EventRetag, 3)
	retag2.OldTagID = "BF-0004"
	if fs := create(retag2); !fs.Has(capture.FindingNeverMarked) {
		t.Errorf("retag of an unmarked old tag: %+v", fs)
	}
	// Loss on capture, then caught again.
	died := newCapture("BF-0006", capture.EventNewMark, 1)
	died.Fate = capture.FateDied
	create(died)
	if fs := create(newCapture("BF-0006", capture.EventRecapture, 2)); !fs.Has(capture.FindingAfterLoss) {
		t.Errorf("recapture after death: %+v", fs)
	}
	// A deleted marking record does not count.
	c, _, err := s.CreateCapture(newCapture("BF-0007", capture.EventNewMark, 1))
	if err != nil {
		t.Fatal(err)
	}
	if err := s.DeleteCapture(c.StudyID, c.ID); err != nil {
		t.Fatal(err)
	}
	if fs := create(newCapture("BF-0007", capture.EventRecapture, 2)); !fs.Has(capture.FindingNeverMarked) {
		t.Errorf("recapture whose only marking record is deleted: %+v", fs)
	}
	// PutCaptures sees earlier records of the same batch.
	batch := []capture.Capture{*newCapture("BF-0008", capture.EventNewMark, 1), *newCapture("BF-0008", capture.EventRecapture, 2)}
	fss, err := s.PutCaptures(batch)
	if err != nil {
		t.Fatal(err)
	}
	if len(fss[0])+len(fss[1]) != 0 {
		t.Errorf("batch findings: %+v", fss)
	}
	// A batch with one invalid record writes nothing.
	before, _ := s.Captures("fen-grid-2025", true)
	bad := []capture.Capture{*newCapture("BF-0009", capture.EventNewMark, 1), *newCapture("nope", capture.EventNewMark, 1)}
	if _, err := s.PutCaptures(bad); !errors.Is(err, capture.ErrInvalid) || !strings.Contains(err.Error(), "record 2") {
		t.Errorf("invalid batch: got %v", err)
	}
	after, _ := s.Captures("fen-grid-2025", true)
	if len(after) != len(before) {
		t.Errorf("a failed batch wrote %d records", len(after)-len(before))
	}
}
