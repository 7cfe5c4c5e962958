package capture_test

import (
	"bytes"
	"errors"
	"path/filepath"
	"reflect"
	"testing"
	"time"

	"github.com/google/uuid"

	"tagtally/capture"
	"tagtally/capture/storetest"
)

func fp(v float64) *float64 { return &v }

// at returns a time inside occasion occ (1-based) of storetest.Study.
func at(occ int, minute int) time.Time {
	return time.Date(2025, 6, 2, 20, minute, 0, 0, time.UTC).Add(time.Duration(occ-1) * 24 * time.Hour)
}

func newCapture(tag string, ev capture.Event, occ int) *capture.Capture {
	return &capture.Capture{
		StudyID: "fen-grid-2025", TagID: tag, Event: ev, StationID: "A1",
		Species: "bank vole", Sex: capture.SexFemale, Age: capture.AgeAdult,
		MassG: fp(21.5), Fate: capture.FateReleased, Observer: "crew 1",
		CapturedAt: at(occ, 0), Lat: fp(52.1), Lon: fp(0.4), AccuracyM: fp(4),
	}
}

func openWithStudy(t *testing.T) *capture.Store {
	t.Helper()
	s := storetest.Open(t)
	if err := s.CreateStudy(storetest.Study()); err != nil {
		t.Fatal(err)
	}
	return s
}

func TestStudyRoundTrip(t *testing.T) {
	s := storetest.Open(t)
	st := storetest.Study()
	if err := s.CreateStudy(st); err != nil {
		t.Fatal(err)
	}
	if err := s.CreateStudy(st); !errors.Is(err, capture.ErrConflict) {
		t.Errorf("second CreateStudy: got %v, want ErrConflict", err)
	}
	got, err := s.GetStudy(st.ID)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(got, st) {
		t.Errorf("GetStudy:\n got %+v\nwant %+v", got, st)
	}
	if _, err := s.GetStudy("nope"); !errors.Is(err, capture.ErrNotFound) {
		t.Errorf("GetStudy(nope): got %v, want ErrNotFound", err)
	}
	st.Name = "renamed"
	if err := s.PutStudy(st); err != nil {
		t.Fatal(err)
	}
	list, err := s.ListStudies()
	if err != nil || len(list) != 1 || list[0].Name != "renamed" {
		t.Errorf("ListStudies = %+v, %v", list, err)
	}
	bad := storetest.Study()
	bad.ID = "other"
	bad.Design = "sideways"
	var ve *capture.ValidationError
	if err := s.CreateStudy(bad); !errors.As(err, &ve) || ve.Field != "design" {
		t.Errorf("invalid study: got %v, want a ValidationError on design", err)
	}
}

func TestCaptureRoundTrip(t *testing.T) {
	s := openWithStudy(t)
	in := newCapture("BF-0001", capture.EventNewMark, 2)
	in.Measurements = []capture.Measurement{{Name: "hind foot", Value: 17.5, Unit: "mm"}}
	in.Notes = "ear slightly torn"
	got, fs, err := s.CreateCapture(in)
	if err != nil {
		t.Fatal(err)
	}
	if len(fs) != 0 {
		t.Errorf("findings for a clean new mark: %+v", fs)
	}
	if in.ID != "" || in.Occasion != 0 {
		t.Errorf("CreateCapture modified its argument: %+v", in)
	}
	u, err := uuid.Parse(got.ID)
	if err != nil || u.Version() != 7 {
		t.Errorf("assigned ID %q is not a UUID v7", got.ID)
	}
	if got.Occasion != 2 {
		t.Errorf("derived occasion = %d, want 2", got.Occasion)
	}
	back, err := s.GetCapture(got.StudyID, got.ID)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(back, got) {
		t.Errorf("GetCapture:\n got %+v\nwant %+v", back, got)
	}
	if _, _, err := s.CreateCapture(got); !errors.Is(err, capture.ErrConflict) {
		t.Errorf("create with an existing ID: got %v, want ErrConflict", err)
	}
	if _, err := s.GetCapture(got.StudyID, "0190b8a0-0000-7000-8000-000000000000"); !errors.Is(err, capture.ErrNotFound) {
		t.Errorf("GetCapture(unknown): got %v, want ErrNotFound", err)
	}

	// Update: the tag changes, so the tag index must follow.
	back.TagID = "BF-0002"
	upd, _, err := s.UpdateCapture(back)
	if err != nil {
		t.Fatal(err)
	}
	if upd.TagID != "BF-0002" {
		t.Errorf("update lost the new tag: %+v", upd)
	}
	page, _, err := s.ListCaptures(got.StudyID, capture.Filter{TagID: "BF-0001"})
	if err != nil || len(page) != 0 {
		t.Errorf("old tag still listed: %v %v", page, err)
	}
	page, _, err = s.ListCaptures(got.StudyID, capture.Filter{TagID: "BF-0002"})
	if err != nil || len(page) != 1 {
		t.Errorf("new tag not listed: %v %v", page, err)
	}

	// Soft delete keeps the record.
	if err := s.DeleteCapture(got.StudyID, got.ID); err != nil {
		t.Fatal(err)
	}
	del, err := s.GetCapture(got.StudyID, got.ID)
	if err != nil || !del.Revision.Deleted {
		t.Errorf("after delete: %+v, %v", del, err)
	}
	if err := s.DeleteCapture(got.StudyID, got.ID); err != nil {
		t.Errorf("second delete: %v", err)
	}
	if err := s.DeleteCapture(got.StudyID, "0190b8a0-0000-7000-8000-000000000000"); !errors.Is(err, capture.ErrNotFound) {
		t.Errorf("delete of an unknown capture: got %v, want ErrNotFound", err)
	}
	if _, _, err := s.UpdateCapture(del); !errors.Is(err, capture.ErrConflict) {
		t.Errorf("update of a deleted capture: got %v, want ErrConflict", err)
	}
	page, _, _ = s.ListCaptures(got.StudyID, capture.Filter{})
	if len(page) != 0 {
		t.Errorf("deleted capture listed by default")
	}
	page, _, _ = s.ListCaptures(got.StudyID, capture.Filter{IncludeDeleted: true})
	if len(page) != 1 {
		t.Errorf("deleted capture not listed with IncludeDeleted")
	}
}

func TestInvalidCaptureWritesNothing(t *testing.T) {
	s := openWithStudy(t)
	c := newCapture("XX-1", capture.EventNewMark, 1)
	_, _, err := s.CreateCapture(c)
	var ve *capture.ValidationError
	if !errors.As(err, &ve) || ve.Field != "tag_id" || !errors.Is(err, capture.ErrInvalid) {
		t.Fatalf("got %v, want a ValidationError on tag_id", err)
	}
	all, err := s.Captures("fen-grid-2025", true)
	if err != nil || len(all) != 0 {
		t.Errorf("store holds %d records after a rejected write (%v)", len(all), err)
	}
	if _, _, err := s.CreateCapture(&capture.Capture{StudyID: "nope", TagID: "BF-0001", Event: capture.EventNewMark, CapturedAt: at(1, 0)}); !errors.Is(err, capture.ErrNotFound) {
		t.Errorf("capture for a missing study: got %v, want ErrNotFound", err)
	}
}

func TestListCapturesPagingAndFilters(t *testing.T) {
	s := openWithStudy(t)
	var batch []capture.Capture
	for i := 0; i < 25; i++ {
		c := newCapture("BF-0100", capture.EventRecapture, i%5+1)
		if i == 0 {
			c.Event = capture.EventNewMark
		}
		if i%2 == 1 {
			c.StationID = "B2"
		}
		c.CapturedAt = c.CapturedAt.Add(time.Duration(i) * time.Minute)
		batch = append(batch, *c)
	}
	if _, err := s.PutCaptures(batch); err != nil {
		t.Fatal(err)
	}
	for _, f := range []capture.Filter{{Limit: 7}, {Limit: 7, TagID: "BF-0100"}} {
		var ids []string
		cursor := ""
		for pages := 0; ; pages++ {
			f.After = cursor
			page, next, err := s.ListCaptures("fen-grid-2025", f)
			if err != nil {
				t.Fatal(err)
			}
			for _, c := range page {
				ids = append(ids, c.ID)
			}
			if next == "" {
				if pages != 3 {
					t.Errorf("filter %+v: %d pages, want 4 (7+7+7+4)", f, pages+1)
				}
				break
			}
			cursor = next
		}
		if len(ids) != 25 {
			t.Errorf("filter %+v: paged through %d captures, want 25", f, len(ids))
		}
		for i := range ids {
			if ids[i] != batch[i].ID {
				t.Errorf("filter %+v: page order differs at %d", f, i)
				break
			}
		}
	}
	for _, tc := range []struct {
		f    capture.Filter
		want int
	}{
		{capture.Filter{Occasion: 3}, 5},
		{capture.Filter{StationID: "B2"}, 12},
		{capture.Filter{StationID: "B2", Occasion: 2}, 3}, // i = 1, 11, 21
		{capture.Filter{Species: "Bank Vole"}, 25},
		{capture.Filter{Species: "wood mouse"}, 0},
		{capture.Filter{TagID: "BF-0999"}, 0},
	} {
		page, next, err := s.ListCaptures("fen-grid-2025", tc.f)
		if err != nil || len(page) != tc.want || next != "" {
			t.Errorf("filter %+v: %d captures (next %q, err %v), want %d", tc.f, len(page), next, err, tc.want)
		}
	}
	if _, _, err := s.ListCaptures("fen-grid-2025", capture.Filter{After: "junk"}); !errors.Is(err, capture.ErrInvalid) {
		t.Errorf("bad cursor: got %v, want ErrInvalid", err)
	}
	if _, _, err := s.ListCaptures("nope", capture.Filter{}); !errors.Is(err, capture.ErrNotFound) {
		t.Errorf("missing study: got %v, want ErrNotFound", err)
	}
}

func TestBackupRestore(t *testing.T) {
	s := openWithStudy(t)
	var batch []capture.Capture
	for i := 0; i < 300; i++ {
		c := newCapture("BF-0200", capture.EventRecapture, i%5+1)
		batch = append(batch, *c)
	}
	batch[0].Event = capture.EventNewMark
	if _, err := s.PutCaptures(batch); err != nil {
		t.Fatal(err)
	}
	if err := s.DeleteCapture("fen-grid-2025", batch[7].ID); err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	n, err := s.Backup(&buf)
	if err != nil || n != int64(buf.Len()) || n == 0 {
		t.Fatalf("Backup: %d bytes, %v", n, err)
	}
	path := filepath.Join(t.TempDir(), "backup.db")
	if err := s.BackupToFile(path); err != nil {
		t.Fatal(err)
	}
	// Writes after the backup must not appear in it.
	if _, _, err := s.CreateCapture(newCapture("BF-0201", capture.EventNewMark, 1)); err != nil {
		t.Fatal(err)
	}
	r, err := capture.Open(path, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if err := r.Check(); err != nil {
		t.Errorf("restored file: %v", err)
	}
	want, _ := s.Captures("fen-grid-2025", true)
	got, err := r.Captures("fen-grid-2025", true)
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != 300 || !reflect.DeepEqual(got, withoutTag(want, "BF-0201")) {
		t.Errorf("restored %d captures, they differ from the 300 backed up", len(got))
	}
	st, err := r.GetStudy("fen-grid-2025")
	if err != nil || st.Name != storetest.Study().Name {
		t.Errorf("restored study: %+v %v", st, err)
	}
}

func withoutTag(cs []capture.Capture, tag string) []capture.Capture {
	var out []capture.Capture
	for _, c := range cs {
		if c.TagID != tag {
			out = append(out, c)
		}
	}
	return out
}
