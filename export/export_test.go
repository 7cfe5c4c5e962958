package export

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/xuri/excelize/v2"

	"tagtally/analysis"
	"tagtally/capture"
	"tagtally/capture/storetest"
	"tagtally/demo"
)

// demoStore loads the invented demo study into a fresh store.
func demoStore(t *testing.T) (*capture.Store, *capture.Study) {
	t.Helper()
	s := storetest.Open(t)
	if _, err := demo.Load(s); err != nil {
		t.Fatal(err)
	}
	st, _ := demo.Build()
	got, err := s.GetStudy(st.ID)
	if err != nil {
		t.Fatal(err)
	}
	return s, got
}

func eachCapture(s *capture.Store, studyID string) func(func(*capture.Capture) error) error {
	return func(fn func(*capture.Capture) error) error {
		caps, err := s.Captures(studyID, true)
		if err != nil {
			return err
		}
		for i := range caps {
			if err := fn(&caps[i]); err != nil {
				return err
			}
		}
		return nil
	}
}

// The captures sheet's column order is part of the file format that
// imports read back: pin it.
func TestCaptureColumnOrderIsPinned(t *testing.T) {
	want := "id,study_id,occasion,occasion_set_by_hand,station_id,tag_id,old_tag_id,event,species,sex,age,mass_g,fate,observer,device,captured_at,lat,lon,accuracy_m,measurements,notes,deleted,revision_id"
	if got := strings.Join(FieldList(), ","); got != want {
		t.Errorf("capture columns changed:\n got %s\nwant %s", got, want)
	}
}

func TestNeutralise(t *testing.T) {
	// Common practice against spreadsheet formula injection.
	for in, want := range map[string]string{"=1+1": "'=1+1", "+44": "'+44", "-3": "'-3", "@SUM(A1)": "'@SUM(A1)", "KV-0001": "KV-0001", "": ""} {
		if got := Neutralise(in); got != want {
			t.Errorf("Neutralise(%q) = %q, want %q", in, got, want)
		}
		if got := Unneutralise(Neutralise(in)); got != in {
			t.Errorf("round trip of %q gave %q", in, got)
		}
	}
}

func comparable(c capture.Capture) capture.Capture {
	c.CapturedAt = c.CapturedAt.UTC().Round(time.Millisecond)
	c.Revision = capture.Revision{Deleted: c.Revision.Deleted}
	if len(c.Measurements) == 0 {
		c.Measurements = nil
	}
	return c
}

// roundTrip imports an exported file of the demo study into an empty
// store and checks that the records and every estimate come back the same.
func roundTrip(t *testing.T, name string, file []byte) {
	s, st := demoStore(t)
	want, err := s.Captures(st.ID, true)
	if err != nil {
		t.Fatal(err)
	}
	empty := storetest.Open(t)
	if err := empty.CreateStudy(st); err != nil {
		t.Fatal(err)
	}
	rep, err := Import(st, file, Options{}, false, func(cs []capture.Capture) error {
		_, err := empty.PutCaptures(cs)
		return err
	})
	if err != nil {
		t.Fatalf("%s import: %v: %v", name, err, rep.Problems)
	}
	got, err := empty.Captures(st.ID, true)
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != len(want) || rep.Written != len(want) {
		t.Fatalf("%s: imported %d (written %d), want %d", name, len(got), rep.Written, len(want))
	}
	for i := range want {
		w, g := comparable(want[i]), comparable(got[i])
		if !reflect.DeepEqual(w, g) {
			t.Fatalf("%s: record %d differs:\n got %+v\nwant %+v", name, i, g, w)
		}
	}
	sameEstimates(t, name, s, empty, st.ID)

	// Importing the same file again adds nothing.
	before := len(got)
	if _, err := Import(st, file, Options{}, false, func(cs []capture.Capture) error {
		_, err := empty.PutCaptures(cs)
		return err
	}); err != nil {
		t.Fatal(err)
	}
	again, _ := empty.Captures(st.ID, true)
	if len(again) != before {
		t.Errorf("%s: re-import changed the record count from %d to %d", name, before, len(again))
	}
}

// sameEstimates compares the whole analysis report (closed model table,
// density, dispersion, demography, occasion summary and m-array) of two
// stores as JSON: identical records must give identical estimates.
func sameEstimates(t *testing.T, name string, a, b *capture.Store, studyID string) {
	t.Helper()
	ra, err := analysis.ForStudy(a, studyID)
	if err != nil {
		t.Fatal(err)
	}
	rb, err := analysis.ForStudy(b, studyID)
	if err != nil {
		t.Fatal(err)
	}
	if ra.Closed == nil || len(ra.Closed.Rows) == 0 {
		t.Fatalf("%s: the demo study has no closed estimates to compare: %v", name, ra.Errors)
	}
	ja, _ := json.Marshal(ra)
	jb, _ := json.Marshal(rb)
	if !bytes.Equal(ja, jb) {
		t.Errorf("%s: estimates differ after the round trip:\n before %s\n after  %s", name, ja, jb)
	}
}

// exportDemo is the demo study's full export, as the export command
// writes it.
func exportDemo(t *testing.T) *StudyExport {
	t.Helper()
	s, st := demoStore(t)
	e, err := LoadStudy(s, st.ID, "test", time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC))
	if err != nil {
		t.Fatal(err)
	}
	return e
}

func TestCSVRoundTrip(t *testing.T) {
	sh, ok := exportDemo(t).Table("captures")
	if !ok {
		t.Fatal("the export has no captures table")
	}
	var buf bytes.Buffer
	if err := WriteCSV(&buf, sh); err != nil {
		t.Fatal(err)
	}
	roundTrip(t, "CSV", buf.Bytes())
}

// The whole program-office workbook (every sheet) imports back: the
// importer finds the Captures sheet among the others.
func TestWorkbookRoundTrip(t *testing.T) {
	var buf bytes.Buffer
	if err := exportDemo(t).WriteXLSX(&buf, t.TempDir()); err != nil {
		t.Fatal(err)
	}
	roundTrip(t, "workbook", buf.Bytes())
}

func TestXLSXRoundTripAndSheetContents(t *testing.T) {
	s, st := demoStore(t)
	h, err := s.Histories(st.ID, nil)
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	sheets := []Sheet{CapturesSheet(eachCapture(s, st.ID)), IndividualsSheet(h), OccasionsSheet(h.Summary(), h.MArray())}
	if err := WriteXLSX(&buf, sheets, t.TempDir()); err != nil {
		t.Fatal(err)
	}
	roundTrip(t, "XLSX", buf.Bytes())

	f, err := excelize.OpenReader(bytes.NewReader(buf.Bytes()))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if got := f.GetSheetList(); !reflect.DeepEqual(got, []string{"Captures", "Individuals", "Occasions"}) {
		t.Errorf("sheets %v", got)
	}
	// Typed cells: captured_at is a date cell, mass a number.
	// A date cell holds a serial day number (days since 1899-12-30, the
	// spreadsheet convention: common practice); 2026 is above 46000.
	raw, _ := f.GetCellValue("Captures", "P2", excelize.Options{RawCellValue: true})
	if serial, err := strconv.ParseFloat(raw, 64); err != nil || serial < 46000 {
		t.Errorf("captured_at raw value %q is not a serial date", raw)
	}
	styled, _ := f.GetCellValue("Captures", "P2")
	if _, err := time.Parse("2006-01-02 15:04:05", styled); err != nil {
		t.Errorf("captured_at shows as %q, want a date and time", styled)
	}
	// The summary row for occasion 1 matches the history set.
	sum := h.Summary()
	v, _ := f.GetCellValue("Occasions", "B2")
	if v != strconv.Itoa(sum[0].Caught) {
		t.Errorf("Occasions!B2 = %q, want n_1 = %d", v, sum[0].Caught)
	}
	// Charts are present on the occasions sheet.
	if !zipHas(t, buf.Bytes(), "xl/charts/chart1.xml") {
		t.Error("workbook has no chart")
	}
	// Panes frozen under the header.
	panes, err := f.GetPanes("Captures")
	if err != nil || !panes.Freeze || panes.YSplit != 1 {
		t.Errorf("captures header not frozen: %+v %v", panes, err)
	}
	// Individuals: one row per animal.
	rows, _ := f.GetRows("Individuals")
	if len(rows)-1 != len(h.Animals) {
		t.Errorf("individuals rows %d, animals %d", len(rows)-1, len(h.Animals))
	}
}

func zipHas(t *testing.T, data []byte, name string) bool {
	t.Helper()
	return bytes.Contains(data, []byte(name))
}

func TestImportReportsEveryBadRow(t *testing.T) {
	_, st := demoStore(t)
	file := "tag,date,station,mass,sex,event\n" +
		"QH-0001,2026-05-14 06:30,A1,21.5,F,new\n" + // fine
		"QH-0002,14/05/2026,A1,20,F,new\n" + // bad date
		"QH-0003,2026-05-14 06:40,ZZ9,20,F,new\n" + // unknown station
		"bad tag!,2026-05-14 06:50,A1,20,F,new\n" + // bad tag format
		"QH-0004,2026-05-14 07:00,A1,heavy,F,new\n" // text in a number column
	var wrote bool
	rep, err := Import(st, []byte(file), Options{}, false, func([]capture.Capture) error { wrote = true; return nil })
	if !errors.Is(err, ErrProblems) {
		t.Fatalf("want ErrProblems, got %v", err)
	}
	if wrote {
		t.Fatal("a file with problems must write nothing")
	}
	want := map[int]string{3: "date", 4: "station", 5: "tag", 6: "mass"}
	got := map[int]string{}
	for _, p := range rep.Problems {
		got[p.Row] = p.Column
		if p.Reason == "" {
			t.Errorf("problem without a reason: %+v", p)
		}
	}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("problems by row %v, want %v (%v)", got, want, rep.Problems)
	}
}

func TestImportRejectsEmptyAndForeignFiles(t *testing.T) {
	_, st := demoStore(t)
	png, _ := os.ReadFile(filepath.Join("..", "pwa", "static", "icons", "icon-192.png"))
	for name, data := range map[string][]byte{
		"empty":       nil,
		"header only": []byte("tag,date\n"),
		"image":       png,
		"zip-like":    []byte("PK\x03\x04garbage"),
	} {
		rep, err := Import(st, data, Options{}, false, func([]capture.Capture) error { t.Fatalf("%s: wrote", name); return nil })
		if !errors.Is(err, ErrProblems) || len(rep.Problems) == 0 {
			t.Errorf("%s: err %v, report %+v", name, err, rep)
		}
	}
}

func TestImportWithMappingFileAndDryRun(t *testing.T) {
	_, st := demoStore(t)
	mapping, err := ReadMapping([]byte("file column,field\nRing no.,tag_id\nWhen,captured_at\nTrap,station_id\n"))
	if err != nil {
		t.Fatal(err)
	}
	file := "Ring no.,When,Trap\nQH-0101,2026-05-14 06:30,B2\n"
	rep, err := Import(st, []byte(file), Options{Mapping: mapping}, true, func([]capture.Capture) error { t.Fatal("dry run wrote"); return nil })
	if err != nil || rep.Valid != 1 || rep.Written != 0 {
		t.Fatalf("dry run: %v %+v", err, rep)
	}
	if _, err := ReadMapping([]byte("Ring,not_a_field\n")); err == nil {
		t.Error("unknown field in mapping accepted")
	}
}

func TestPhoneOutboxBackupImports(t *testing.T) {
	_, st := demoStore(t)
	file := `{"kind":"tagtally outbox backup","device":"phone-1","study_id":"` + st.ID + `","records":[
	 {"id":"0190f2a0-0000-7000-8000-000000000001","study_id":"` + st.ID + `","tag_id":"QH-0201","event":"new","captured_at":"2026-05-14T06:30:00Z","station_id":"A1"}]}`
	var got []capture.Capture
	rep, err := Import(st, []byte(file), Options{}, false, func(cs []capture.Capture) error { got = cs; return nil })
	if err != nil || len(got) != 1 || got[0].Device != "phone-1" {
		t.Fatalf("%v %+v %+v", err, rep, got)
	}
	// The occasion is derived when records are read, so it is not written
	// into the record: the phone's own push of it later must be the same
	// body, hence the same revision, not a conflicting one.
	if got[0].Occasion != 0 || got[0].OccasionSetByHand {
		t.Errorf("imported backup record has occasion %d (set by hand %v), want it as the phone sent it (none)", got[0].Occasion, got[0].OccasionSetByHand)
	}
}

// A phone lets its crew save a tag outside the study's series after a
// warning, and its push of the record is stored as sent; the backup of the
// same outbox is imported too, with the tag as a finding. Anything else
// the study refuses still stops the import, and a table of older data with
// the same tag is still refused (demo series: QH- and four digits).
func TestPhoneOutboxBackupTagOutsideSeries(t *testing.T) {
	_, st := demoStore(t)
	backup := func(tag, station string) []byte {
		return []byte(`{"kind":"tagtally outbox backup","device":"phone-1","study_id":"` + st.ID + `","records":[
	 {"id":"0190f2a0-0000-7000-8000-000000000002","study_id":"` + st.ID + `","tag_id":"` + tag + `","event":"new","captured_at":"2026-05-14T06:30:00Z","station_id":"` + station + `"}]}`)
	}
	var got []capture.Capture
	rep, err := Import(st, backup("QH-201", "A1"), Options{}, false, func(cs []capture.Capture) error { got = cs; return nil })
	if err != nil || len(got) != 1 || got[0].TagID != "QH-201" {
		t.Fatalf("backup with a tag outside the series: %v %+v %+v", err, rep, got)
	}
	if fs := rep.Findings[1]; !slices.ContainsFunc(fs, func(f capture.Finding) bool { return f.Code == capture.FindingTagFormat && f.Field == "tag_id" }) {
		t.Errorf("findings %+v, want %s on tag_id", fs, capture.FindingTagFormat)
	}
	if rep, err := Import(st, backup("QH-0201", "Z9"), Options{}, false, func([]capture.Capture) error { t.Fatal("wrote a refused backup"); return nil }); !errors.Is(err, ErrProblems) || len(rep.Problems) != 1 || rep.Problems[0].Column != "station_id" {
		t.Errorf("backup with an unknown station: %v %+v, want a problem in station_id", err, rep)
	}
	table := "tag,event,date,station\nQH-201,new,2026-05-14T06:30:00Z,A1\n"
	if rep, err := Import(st, []byte(table), Options{}, false, func([]capture.Capture) error { t.Fatal("wrote a refused table"); return nil }); !errors.Is(err, ErrProblems) || len(rep.Problems) != 1 || rep.Problems[0].Column != "tag" {
		t.Errorf("table with a tag outside the series: %v %+v, want a problem in its tag column", err, rep)
	}
}

// A row with several problems lists all of them, so the file is corrected
// in one round; a cell that does not parse is reported once, not again
// as the empty field it leaves (demo study: QH- and four digits, stations
// A1 to H8).
func TestImportListsEveryProblemOfARow(t *testing.T) {
	_, st := demoStore(t)
	table := "tag,event,date,station,sex,mass\n" +
		"QH-12,new,2026-06-10T06:10:00Z,Z9,female,abc\n" +
		"QH-0001,recapture,yesterday,A1,female,21\n"
	rep, err := Import(st, []byte(table), Options{}, false, func([]capture.Capture) error { t.Fatal("wrote a file with problems"); return nil })
	if !errors.Is(err, ErrProblems) {
		t.Fatalf("%v %+v", err, rep)
	}
	type where struct {
		row    int
		column string
	}
	var got []where
	for _, p := range rep.Problems {
		got = append(got, where{p.Row, p.Column})
	}
	want := []where{{2, "mass"}, {2, "tag"}, {2, "station"}, {3, "date"}}
	if !slices.Equal(got, want) {
		t.Errorf("problems at %v, want %v (%+v)", got, want, rep.Problems)
	}
}

func FuzzReadTable(f *testing.F) {
	f.Add([]byte("tag,date\nKV-1,2026-05-14\n"))
	f.Add([]byte("\"a,b\",c\n1,2\n"))
	f.Add([]byte("PK\x03\x04"))
	st := &capture.Study{ID: "s1", Design: capture.DesignClosed}
	f.Fuzz(func(t *testing.T, data []byte) {
		tab, err := ReadTable(data, "")
		if err != nil {
			return
		}
		// Parsing rows must never panic, whatever the cells hold.
		ParseCaptures(st, tab, Options{})
		// Every row read back is a row of the CSV.
		if !tab.FromWorkbook {
			r := csv.NewReader(bytes.NewReader(bytes.TrimPrefix(data, []byte("\xef\xbb\xbf"))))
			r.FieldsPerRecord = -1
			all, err := r.ReadAll()
			if err != nil {
				t.Fatalf("ReadTable accepted what encoding/csv rejects: %v", err)
			}
			if len(tab.Rows) > len(all)-1 {
				t.Fatalf("more rows (%d) than the file has (%d)", len(tab.Rows), len(all)-1)
			}
		}
	})
}
