package export

import (
	"fmt"
	"io"
	"time"

	"tagtally/analysis"
	"tagtally/capture"
)

// MemoryLimit is the soft heap limit the export command sets
// (runtime/debug.SetMemoryLimit). Without it the garbage collector lets the
// heap grow to about twice what is live while records are decoded and
// sheets written; with it, a 100,000-capture study exports in well under
// 150 MB at some cost in time (see BenchmarkExport100k).
const MemoryLimit = 40 << 20

// StudyExport is everything a study's workbook shows, gathered once.
type StudyExport struct {
	Study *capture.Study
	// EachCapture walks every record, deleted ones included, in store
	// order. From a store it reads them afresh inside a read transaction,
	// so the records need not all stay in memory while the sheet streams.
	EachCapture func(fn func(*capture.Capture) error) error
	Report      *analysis.Report
	Checks      []capture.Check
	Meta        Meta
}

// LoadStudy reads a study, all its records, its analysis report and its
// data checks.
func LoadStudy(s *capture.Store, studyID string, version string, now time.Time) (*StudyExport, error) {
	st, err := s.GetStudy(studyID)
	if err != nil {
		return nil, fmt.Errorf("export: %w", err)
	}
	all, err := s.Captures(studyID, true)
	if err != nil {
		return nil, fmt.Errorf("export: %w", err)
	}
	devices := map[string]int{}
	for i := range all {
		if !all[i].Revision.Deleted && all[i].Device != "" {
			devices[all[i].Device]++
		}
	}
	// The history builder skips deleted records itself, so the one slice
	// serves both the report and the captures sheet.
	rep, err := analysis.FromCaptures(st, all)
	if err != nil {
		return nil, fmt.Errorf("export: %w", err)
	}
	checks := capture.RunChecks(st, all)
	each := func(fn func(*capture.Capture) error) error {
		return s.View(func(tx *capture.Tx) error { return tx.ForEachCapture(studyID, fn) })
	}
	return &StudyExport{Study: st, EachCapture: each, Report: rep, Checks: checks,
		Meta: Meta{Version: version, ExportedAt: now.UTC(), OpenChecks: len(checks), Devices: devices}}, nil
}

// Sheets lists the workbook's sheets in order; sections that do not apply
// to the study's design are left out.
func (e *StudyExport) Sheets() []Sheet {
	sheets := []Sheet{
		SummarySheet(e.Study, e.Report, e.Meta),
		CapturesSheet(e.EachCapture),
		IndividualsSheet(e.Report.Histories),
		OccasionsSheet(e.Report.Summary, e.Report.MArray),
	}
	for _, opt := range []func(*analysis.Report) (Sheet, bool){ClosedSheet, OpenSheet, SurvivalModelsSheet, DemographySheet, DensitySheet, DispersionSheet} {
		if sh, ok := opt(e.Report); ok {
			sheets = append(sheets, sh)
		}
	}
	return append(sheets, ChecksSheet(e.Checks))
}

// WriteXLSX writes the study's workbook. Write it to a local file: the
// captures sheet is read inside a store read transaction, which must not
// wait on a network client.
func (e *StudyExport) WriteXLSX(w io.Writer, tmpDir string) error {
	return WriteXLSX(w, e.Sheets(), tmpDir)
}

// tableKeys are the short names of the workbook's tables for CSV
// downloads, in workbook order.
var tableKeys = map[string]string{
	"Summary": "summary", "Captures": "captures", "Individuals": "individuals", "Occasions": "occasions",
	"Closed estimates": "closed", "Open estimates": "open", "Survival models": "survival",
	"Demography": "demography", "Density": "density", "Dispersion": "dispersion", "Data checks": "checks",
}

// TableNames lists the short names of the tables this study's workbook
// has, for CSV export.
func (e *StudyExport) TableNames() []string {
	var out []string
	for _, sh := range e.Sheets() {
		out = append(out, tableKeys[sh.Name])
	}
	return out
}

// Table returns the sheet with the given short name (see TableNames).
func (e *StudyExport) Table(key string) (Sheet, bool) {
	for _, sh := range e.Sheets() {
		if tableKeys[sh.Name] == key {
			return sh, true
		}
	}
	return Sheet{}, false
}
