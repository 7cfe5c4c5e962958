package export

import (
	"bytes"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"runtime/debug"
	"strconv"
	"testing"
	"time"

	"github.com/xuri/excelize/v2"

	"tagtally/capture"
	"tagtally/capture/storetest"
)

func TestStudyWorkbook(t *testing.T) {
	s, st := demoStore(t)
	e, err := LoadStudy(s, st.ID, "test", time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC))
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := e.WriteXLSX(&buf, t.TempDir()); err != nil {
		t.Fatal(err)
	}
	f, err := excelize.OpenReader(&buf)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	want := []string{"Summary", "Captures", "Individuals", "Occasions", "Closed estimates", "Demography", "Density", "Dispersion", "Data checks"}
	got := f.GetSheetList()
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Fatalf("sheets %v, want %v", got, want)
	}
	headers := map[string]string{
		"Summary":          "item",
		"Captures":         "id",
		"Individuals":      "animal",
		"Occasions":        "occasion",
		"Closed estimates": "model",
		"Demography":       "measure",
		"Density":          "quantity",
		"Data checks":      "check",
		"Dispersion":       "index",
	}
	for sheet, h := range headers {
		if v, _ := f.GetCellValue(sheet, "A1"); v != h {
			t.Errorf("%s!A1 = %q, want %q", sheet, v, h)
		}
	}
	// The closed sheet's first row is the best model, with the same N as
	// the report (the export reads results; it does not recompute them).
	best := e.Report.Closed.Rows[0]
	raw, _ := f.GetCellValue("Closed estimates", "C2", excelize.Options{RawCellValue: true})
	n, err := strconv.ParseFloat(raw, 64)
	if err != nil || math.Abs(n-best.Result.N.Estimate) > 1e-9*n {
		t.Errorf("Closed estimates!C2 = %q, report N = %v", raw, best.Result.N.Estimate)
	}
	if typ, _ := f.GetCellType("Closed estimates", "C2"); typ == excelize.CellTypeSharedString || typ == excelize.CellTypeInlineString {
		t.Error("N is written as text, want a number")
	}
	// Charts: N by model on the closed sheet and captures per occasion.
	for _, c := range []string{"xl/charts/chart1.xml", "xl/charts/chart2.xml"} {
		if !bytes.Contains(buf.Bytes(), []byte(c)) && !zipHas(t, mustBytes(t, f), c) {
			t.Errorf("workbook lacks %s", c)
		}
	}
	// The summary carries the cautions and the open-check count.
	rows, _ := f.GetRows("Summary")
	var sawCheck, sawHandling bool
	for _, r := range rows {
		if len(r) > 1 && r[0] == "Open data-check findings" && r[1] == strconv.Itoa(len(e.Checks)) && len(e.Checks) > 0 {
			sawCheck = true
		}
		if len(r) > 0 && r[0] == "Handling" {
			sawHandling = true
		}
	}
	if !sawCheck || !sawHandling {
		t.Errorf("summary lacks the data-check count or the handling caution")
	}
}

func mustBytes(t *testing.T, f *excelize.File) []byte {
	var b bytes.Buffer
	if _, err := f.WriteTo(&b); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

// BenchmarkExport100k writes the workbook of a study with 100,000
// captures (20,000 animals over 10 occasions) and reports the peak heap.
func BenchmarkExport100k(b *testing.B) {
	s, st := benchStore(b)
	// The export command sets the same soft limit (see cmd/tagtally).
	defer debug.SetMemoryLimit(debug.SetMemoryLimit(MemoryLimit))
	b.ResetTimer()
	var peak uint64
	for i := 0; i < b.N; i++ {
		stop := make(chan struct{})
		done := make(chan uint64)
		go func() {
			var ms runtime.MemStats
			var p uint64
			for {
				runtime.ReadMemStats(&ms)
				p = max(p, ms.HeapAlloc)
				select {
				case <-stop:
					done <- p
					return
				case <-time.After(20 * time.Millisecond):
				}
			}
		}()
		e, err := LoadStudy(s, st.ID, "bench", time.Now())
		if err != nil {
			b.Fatal(err)
		}
		if i == 0 {
			runtime.GC()
			var ms runtime.MemStats
			runtime.ReadMemStats(&ms)
			b.Logf("heap after loading records and computing the report: %.0f MiB", float64(ms.HeapAlloc)/(1<<20))
		}
		out, err := os.Create(filepath.Join(b.TempDir(), "study.xlsx"))
		if err != nil {
			b.Fatal(err)
		}
		if err := e.WriteXLSX(out, b.TempDir()); err != nil {
			b.Fatal(err)
		}
		size, _ := out.Seek(0, io.SeekCurrent)
		out.Close()
		close(stop)
		peak = max(peak, <-done)
		b.ReportMetric(float64(size)/1e6, "MB-file")
	}
	b.ReportMetric(float64(peak)/(1<<20), "MiB-peak-heap")
}

// benchStore holds a study of 100,000 captures: 20,000 animals caught 5
// times each over 10 occasions (invented, for benchmarks only).
func benchStore(b *testing.B) (*capture.Store, *capture.Study) {
	s := storetest.Open(b)
	st := &capture.Study{ID: "bench", Name: "Benchmark grid", Design: capture.DesignClosed, CreatedAt: time.Date(2026, 5, 1, 0, 0, 0, 0, time.UTC)}
	start := time.Date(2026, 5, 1, 0, 0, 0, 0, time.UTC)
	for i := 1; i <= 10; i++ {
		st.Occasions = append(st.Occasions, capture.Occasion{Index: i, Start: start.Add(time.Duration(i-1) * 24 * time.Hour), End: start.Add(time.Duration(i-1)*24*time.Hour + 12*time.Hour)})
	}
	if err := s.CreateStudy(st); err != nil {
		b.Fatal(err)
	}
	const animals, perAnimal = 20000, 5
	batch := make([]capture.Capture, 0, 5000)
	for a := 0; a < animals; a++ {
		for k := 0; k < perAnimal; k++ {
			occ := (a + k*2) % 10
			ev := capture.EventRecapture
			if k == 0 {
				ev = capture.EventNewMark
			}
			m := 20 + float64(a%7)
			batch = append(batch, capture.Capture{StudyID: st.ID, TagID: fmt.Sprintf("T%06d", a), Event: ev, Sex: capture.SexFemale, MassG: &m,
				CapturedAt: st.Occasions[occ].Start.Add(time.Duration(a%600) * time.Second), Observer: "bench", Device: "phone-1"})
		}
		if len(batch) >= 5000 {
			if _, err := s.PutCaptures(batch); err != nil {
				b.Fatal(err)
			}
			batch = batch[:0]
		}
	}
	return s, st
}
