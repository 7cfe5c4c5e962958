package export

import (
	"bytes"
	"crypto/sha256"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
	"time"

	"github.com/google/uuid"
	"github.com/xuri/excelize/v2"

	"tagtally/capture"
)

// Problem is one thing wrong with one row of an imported file. Row is the
// spreadsheet row number (the header is row 1; 0 for the file as a
// whole), Column the file's own header.
type Problem struct {
	Row    int    `json:"row"`
	Column string `json:"column,omitempty"`
	Value  string `json:"value,omitempty"`
	Reason string `json:"reason"`
}

func (p Problem) String() string {
	var b strings.Builder
	if p.Row > 0 {
		fmt.Fprintf(&b, "row %d", p.Row)
	} else {
		b.WriteString("file")
	}
	if p.Column != "" {
		fmt.Fprintf(&b, ", column %q", p.Column)
	}
	if p.Value != "" {
		fmt.Fprintf(&b, ", value %q", p.Value)
	}
	b.WriteString(": ")
	b.WriteString(p.Reason)
	return b.String()
}

// Report says what an import found. Problems stop the import: nothing is
// written unless Problems is empty. Notes are worth reading but do not.
type Report struct {
	Rows     int                       `json:"rows"`
	Valid    int                       `json:"valid"`
	Problems []Problem                 `json:"problems"`
	Notes    []Problem                 `json:"notes,omitempty"`
	Findings map[int][]capture.Finding `json:"findings,omitempty"`
	Mapping  map[string]string         `json:"mapping"` // file column -> field
	Written  int                       `json:"written"`
}

// Options for reading an import file.
type Options struct {
	// Mapping maps file headers (case-insensitive) to field names, for
	// headers the built-in names do not recognise.
	Mapping map[string]string
	// Location is the time zone of times written without one; nil = UTC.
	Location *time.Location
	// Sheet picks a workbook sheet by name.
	Sheet string
}

// ErrProblems is returned by Import when any row has a problem.
var ErrProblems = errors.New("the file has problems; nothing was imported")

// fieldNames maps normalised header spellings to capture fields.
var fieldNames = map[string]string{}

func init() {
	for field, names := range map[string][]string{
		"id":                   {"id", "uuid", "record id"},
		"study_id":             {"study_id", "study"},
		"occasion":             {"occasion", "occasion number", "session"},
		"occasion_set_by_hand": {"occasion_set_by_hand", "occasion set by hand"},
		"station_id":           {"station_id", "station", "trap", "net", "trap station"},
		"tag_id":               {"tag_id", "tag", "tag number", "band", "band number", "ring", "mark"},
		"old_tag_id":           {"old_tag_id", "old tag", "previous tag", "old band"},
		"event":                {"event", "capture type", "event type"},
		"species":              {"species"},
		"sex":                  {"sex"},
		"age":                  {"age", "age class"},
		"mass_g":               {"mass_g", "mass", "mass (g)", "weight", "weight_g", "weight (g)"},
		"fate":                 {"fate"},
		"observer":             {"observer", "handler", "recorder"},
		"device":               {"device"},
		"captured_at":          {"captured_at", "date", "datetime", "date time", "time", "capture time"},
		"lat":                  {"lat", "latitude"},
		"lon":                  {"lon", "long", "longitude"},
		"accuracy_m":           {"accuracy_m", "accuracy", "gps accuracy"},
		"measurements":         {"measurements"},
		"notes":                {"notes", "comments", "remarks", "note"},
		"deleted":              {"deleted"},
		"revision_id":          {"revision_id"},
	} {
		for _, n := range names {
			fieldNames[normHeader(n)] = field
		}
	}
}

// normHeader lower-cases a header and drops everything but letters and
// digits, so "Mass (g)", "mass_g" and "MASS G" match.
func normHeader(h string) string {
	var b strings.Builder
	for _, r := range strings.ToLower(h) {
		if r >= 'a' && r <= 'z' || r >= '0' && r <= '9' {
			b.WriteRune(r)
		}
	}
	return b.String()
}

// ReadMapping reads a mapping file: CSV lines "file column,field".
func ReadMapping(data []byte) (map[string]string, error) {
	r := csv.NewReader(bytes.NewReader(data))
	r.FieldsPerRecord = 2
	recs, err := r.ReadAll()
	if err != nil {
		return nil, fmt.Errorf("mapping file: %w (each line is: file column,field name)", err)
	}
	m := map[string]string{}
	for i, rec := range recs {
		field := strings.TrimSpace(rec[1])
		if _, ok := fieldNames[normHeader(field)]; !ok || fieldNames[normHeader(field)] != field {
			if i == 0 && strings.EqualFold(field, "field") {
				continue // a header line
			}
			return nil, fmt.Errorf("mapping file line %d: %q is not a field name (fields: %s)", i+1, field, strings.Join(FieldList(), ", "))
		}
		m[strings.TrimSpace(rec[0])] = field
	}
	return m, nil
}

// FieldList names every importable field, in the export's column order.
func FieldList() []string {
	out := make([]string, len(CaptureColumns))
	for i, c := range CaptureColumns {
		out[i] = c.Header
	}
	return out
}

// ParseCaptures turns a table into capture records for study st, checking
// every row. Records get stable IDs: the file's own id column when
// present, otherwise an ID derived from the study and the row's content,
// so importing the same file twice does not duplicate records.
func ParseCaptures(st *capture.Study, t *Table, opts Options) ([]capture.Capture, *Report) {
	rep := &Report{Rows: len(t.Rows), Mapping: map[string]string{}, Findings: map[int][]capture.Finding{}}
	loc := opts.Location
	if loc == nil {
		loc = time.UTC
	}
	user := map[string]string{}
	for k, v := range opts.Mapping {
		user[normHeader(k)] = v
	}
	col := map[string]int{}
	header := map[string]string{} // field -> file header
	for i, h := range t.Header {
		field, ok := user[normHeader(h)]
		if !ok {
			field, ok = fieldNames[normHeader(h)]
		}
		if !ok {
			if strings.TrimSpace(h) != "" {
				rep.Notes = append(rep.Notes, Problem{Column: h, Reason: "this column is not used; name its field in a mapping file to import it"})
			}
			continue
		}
		if j, dup := col[field]; dup {
			rep.Problems = append(rep.Problems, Problem{Column: h, Reason: fmt.Sprintf("this column and column %q both map to %s", t.Header[j], field)})
			continue
		}
		col[field] = i
		header[field] = h
		rep.Mapping[h] = field
	}
	for _, need := range []string{"tag_id", "captured_at"} {
		if _, ok := col[need]; !ok {
			rep.Problems = append(rep.Problems, Problem{Reason: fmt.Sprintf("no column for %s; name one in a mapping file", need)})
		}
	}
	if len(rep.Problems) > 0 {
		return nil, rep
	}
	type parsed struct {
		c     capture.Capture
		line  int
		rec   []string
		probs []Problem
	}
	rows := make([]parsed, len(t.Rows))
	for r, rec := range t.Rows {
		c, probs := parseRow(st, rec, col, header, t.Line[r], t.FromWorkbook, loc)
		rows[r] = parsed{c: c, line: t.Line[r], rec: rec, probs: probs}
	}
	if _, ok := col["event"]; !ok {
		inferEvents(rows, func(p *parsed) *capture.Capture { return &p.c }, func(p *parsed) bool { return len(p.probs) == 0 })
		rep.Notes = append(rep.Notes, Problem{Reason: "the file has no event column: each tag's earliest row is taken as its new mark and later rows as recaptures"})
	}
	var out []capture.Capture
	seen := map[string]int{}
	for _, p := range rows {
		c, probs, line, rec := p.c, p.probs, p.line, p.rec
		// Every field is checked, so that all of a row's problems are
		// listed at once. Where a cell did not parse, its field (left
		// empty) is not reported again, nor are fields the file has no
		// column for (an event inferred only for rows that parsed).
		unparsed := map[string]bool{}
		for _, pr := range probs {
			unparsed[pr.Column] = true
		}
		capture.DeriveOccasion(st, &c)
		fs, errs, err := capture.ValidateCaptureAll(st, &c, false)
		if err != nil {
			probs = append(probs, Problem{Row: line, Reason: err.Error()})
		}
		for _, ve := range errs {
			f := baseField(ve.Field)
			h, hasColumn := header[f]
			if len(p.probs) > 0 && (!hasColumn || unparsed[h]) {
				continue
			}
			probs = append(probs, Problem{Row: line, Column: h, Value: cell(rec, col, f), Reason: ve.Message})
		}
		if len(probs) == 0 && len(fs) > 0 {
			rep.Findings[line] = fs
		}
		if len(probs) > 0 {
			rep.Problems = append(rep.Problems, probs...)
			continue
		}
		if first, ok := seen[c.ID]; ok {
			rep.Notes = append(rep.Notes, Problem{Row: line, Reason: fmt.Sprintf("repeats row %d exactly; imported once", first)})
			continue
		}
		seen[c.ID] = line
		rep.Valid++
		out = append(out, c)
	}
	return out, rep
}

// inferEvents fills in the event of rows that have none, for older files
// that record only tag and date: in time order, a tag's first row is its
// new mark and later rows are recaptures (a row naming an old tag is a
// retag). Rows that failed to parse are skipped.
func inferEvents[T any](rows []T, capOf func(*T) *capture.Capture, ok func(*T) bool) {
	idx := make([]int, 0, len(rows))
	for i := range rows {
		if ok(&rows[i]) && capOf(&rows[i]).Event == "" {
			idx = append(idx, i)
		}
	}
	sort.SliceStable(idx, func(a, b int) bool {
		return capOf(&rows[idx[a]]).CapturedAt.Before(capOf(&rows[idx[b]]).CapturedAt)
	})
	seen := map[string]bool{}
	for _, i := range idx {
		c := capOf(&rows[i])
		tag := strings.ToUpper(c.TagID)
		switch {
		case c.OldTagID != "":
			c.Event = capture.EventRetag
			seen[strings.ToUpper(c.OldTagID)] = true
		case seen[tag]:
			c.Event = capture.EventRecapture
		default:
			c.Event = capture.EventNewMark
		}
		seen[tag] = true
	}
}

func baseField(f string) string {
	if i := strings.IndexAny(f, ".["); i >= 0 {
		return f[:i]
	}
	return f
}

func cell(rec []string, col map[string]int, field string) string {
	i, ok := col[field]
	if !ok || i >= len(rec) {
		return ""
	}
	return strings.TrimSpace(Unneutralise(rec[i]))
}

func parseRow(st *capture.Study, rec []string, col map[string]int, header map[string]string, line int, workbook bool, loc *time.Location) (capture.Capture, []Problem) {
	var probs []Problem
	bad := func(field, reason string) {
		probs = append(probs, Problem{Row: line, Column: header[field], Value: cell(rec, col, field), Reason: reason})
	}
	get := func(field string) string { return cell(rec, col, field) }
	c := capture.Capture{StudyID: st.ID}
	if v := get("study_id"); v != "" && v != st.ID {
		// Records exported from another study are re-homed deliberately.
		c.StudyID = st.ID
	}
	c.TagID = get("tag_id")
	c.OldTagID = get("old_tag_id")
	c.StationID = get("station_id")
	c.Species = get("species")
	c.Observer = get("observer")
	c.Device = get("device")
	c.Notes = get("notes")
	if v := get("event"); v != "" {
		if e, ok := eventWords[strings.ToLower(v)]; ok {
			c.Event = e
		} else {
			bad("event", "not one of new, recapture, resight, retag, dead")
		}
	} else if c.OldTagID != "" {
		c.Event = capture.EventRetag
	}
	if v := get("sex"); v != "" {
		if s, ok := sexWords[strings.ToLower(v)]; ok {
			c.Sex = s
		} else {
			bad("sex", "not one of female, male, unknown (or F, M, U)")
		}
	}
	if v := get("age"); v != "" {
		if a, ok := ageWords[strings.ToLower(v)]; ok {
			c.Age = a
		} else {
			bad("age", "not one of juvenile, subadult, adult, unknown")
		}
	}
	if v := get("fate"); v != "" {
		if f, ok := fateWords[strings.ToLower(v)]; ok {
			c.Fate = f
		} else {
			bad("fate", "not one of released, died, removed")
		}
	}
	number := func(field string) *float64 {
		v := get(field)
		if v == "" {
			return nil
		}
		x, err := strconv.ParseFloat(v, 64)
		if err != nil || math.IsNaN(x) || math.IsInf(x, 0) {
			bad(field, "not a number")
			return nil
		}
		return &x
	}
	c.MassG = number("mass_g")
	c.Lat = number("lat")
	c.Lon = number("lon")
	c.AccuracyM = number("accuracy_m")
	if v := get("occasion"); v != "" {
		n, err := strconv.Atoi(v)
		if err != nil || n < 1 {
			bad("occasion", "not a whole number from 1 up")
		} else {
			c.Occasion = n
		}
	}
	if v := get("occasion_set_by_hand"); v != "" {
		b, ok := boolWords[strings.ToLower(v)]
		if !ok {
			bad("occasion_set_by_hand", "not yes or no")
		}
		c.OccasionSetByHand = b
	} else if c.Occasion > 0 {
		// An old file's occasion column is the crew's own numbering: keep it.
		c.OccasionSetByHand = true
	}
	if v := get("deleted"); v != "" {
		b, ok := boolWords[strings.ToLower(v)]
		if !ok {
			bad("deleted", "not yes or no")
		}
		c.Revision.Deleted = b
	}
	if v := get("captured_at"); v != "" {
		t, err := parseTime(v, workbook, loc)
		if err != nil {
			bad("captured_at", err.Error())
		} else {
			c.CapturedAt = t
		}
	} else {
		bad("captured_at", "no date or time")
	}
	if v := get("measurements"); v != "" {
		ms, err := ParseMeasurements(v)
		if err != nil {
			bad("measurements", err.Error())
		}
		c.Measurements = ms
	}
	if v := get("id"); v != "" {
		id, err := uuid.Parse(v)
		if err != nil {
			bad("id", "not a UUID")
		} else {
			c.ID = id.String()
		}
	}
	if len(probs) == 0 && c.ID == "" {
		c.ID = stableID(st.ID, c.CapturedAt, rec)
	}
	return c, probs
}

var (
	eventWords = map[string]capture.Event{
		"new": capture.EventNewMark, "new mark": capture.EventNewMark, "newly marked": capture.EventNewMark, "n": capture.EventNewMark,
		"recapture": capture.EventRecapture, "recap": capture.EventRecapture, "r": capture.EventRecapture,
		"resight": capture.EventResight, "resighting": capture.EventResight,
		"retag": capture.EventRetag, "dead": capture.EventDeadRecovery, "dead recovery": capture.EventDeadRecovery,
	}
	sexWords  = map[string]capture.Sex{"female": capture.SexFemale, "f": capture.SexFemale, "male": capture.SexMale, "m": capture.SexMale, "unknown": capture.SexUnknown, "u": capture.SexUnknown, "?": capture.SexUnknown}
	ageWords  = map[string]capture.AgeClass{"juvenile": capture.AgeJuvenile, "juv": capture.AgeJuvenile, "j": capture.AgeJuvenile, "subadult": capture.AgeSubadult, "sub": capture.AgeSubadult, "sa": capture.AgeSubadult, "adult": capture.AgeAdult, "ad": capture.AgeAdult, "a": capture.AgeAdult, "unknown": capture.AgeUnknown, "u": capture.AgeUnknown}
	fateWords = map[string]capture.Fate{"released": capture.FateReleased, "died": capture.FateDied, "dead": capture.FateDied, "removed": capture.FateRemoved}
	boolWords = map[string]bool{"yes": true, "y": true, "true": true, "1": true, "no": false, "n": false, "false": false, "0": false}
)

var timeLayouts = []string{time.RFC3339Nano, "2006-01-02 15:04:05", "2006-01-02T15:04:05", "2006-01-02 15:04", "2006-01-02"}

// parseTime reads a capture time: RFC 3339, "YYYY-MM-DD hh:mm[:ss]" or a
// date alone (times without a zone are in loc), or, from a workbook, a
// spreadsheet serial day number.
func parseTime(v string, workbook bool, loc *time.Location) (time.Time, error) {
	for _, layout := range timeLayouts {
		if t, err := time.ParseInLocation(layout, v, loc); err == nil {
			return t.UTC(), nil
		}
	}
	if workbook {
		if serial, err := strconv.ParseFloat(v, 64); err == nil && serial > 0 && serial < 2958466 {
			t, err := excelize.ExcelDateToTime(serial, false)
			if err == nil {
				// Serial days carry about 10 µs of precision: round to the
				// millisecond phones record.
				t = t.Round(time.Millisecond)
				return time.Date(t.Year(), t.Month(), t.Day(), t.Hour(), t.Minute(), t.Second(), t.Nanosecond(), time.UTC), nil
			}
		}
	}
	return time.Time{}, errors.New("not a date and time (use 2026-05-14 06:30 or 2026-05-14T06:30:00Z)")
}

// ParseMeasurements reads "name=value unit; name=value unit".
func ParseMeasurements(s string) ([]capture.Measurement, error) {
	var out []capture.Measurement
	for _, part := range strings.Split(s, ";") {
		part = strings.TrimSpace(part)
		if part == "" {
			continue
		}
		name, rest, ok := strings.Cut(part, "=")
		if !ok || strings.TrimSpace(name) == "" {
			return nil, fmt.Errorf("measurement %q is not name=value unit", part)
		}
		fields := strings.Fields(rest)
		if len(fields) == 0 {
			return nil, fmt.Errorf("measurement %q has no value", part)
		}
		x, err := strconv.ParseFloat(fields[0], 64)
		if err != nil || math.IsNaN(x) || math.IsInf(x, 0) {
			return nil, fmt.Errorf("measurement %q: value is not a number", part)
		}
		out = append(out, capture.Measurement{Name: strings.TrimSpace(name), Value: x, Unit: strings.Join(fields[1:], " ")})
	}
	return out, nil
}

// stableID derives a version-7-shaped UUID from the capture time (so
// records stay time-ordered in the store) and a hash of the study and the
// row's cells, so the same row imported again gets the same ID.
func stableID(studyID string, at time.Time, rec []string) string {
	h := sha256.New()
	h.Write([]byte(studyID))
	for _, f := range rec {
		h.Write([]byte{0})
		h.Write([]byte(strings.TrimSpace(f)))
	}
	sum := h.Sum(nil)
	var u uuid.UUID
	ms := uint64(max(at.UnixMilli(), 0))
	for i := 5; i >= 0; i-- {
		u[i] = byte(ms)
		ms >>= 8
	}
	copy(u[6:], sum[:10])
	u[6] = u[6]&0x0f | 0x70
	u[8] = u[8]&0x3f | 0x80
	return u.String()
}

// OutboxKind marks a phone's outbox backup file.
const OutboxKind = "tagtally outbox backup"

// ParseOutboxBackup reads the backup file the phone app saves: a JSON
// object with kind, device, study_id and the records waiting to be sent.
// Each record is checked against the study like any imported row, except
// that a tag outside the study's tag series is a finding rather than a
// problem (capture.ValidateCaptureAll as sent); Row in a problem is the record's
// position in the file (1 = first).
func ParseOutboxBackup(st *capture.Study, data []byte) ([]capture.Capture, *Report, error) {
	var file struct {
		Kind    string            `json:"kind"`
		Device  string            `json:"device"`
		StudyID string            `json:"study_id"`
		Records []json.RawMessage `json:"records"`
	}
	if err := json.Unmarshal(data, &file); err != nil || file.Kind != OutboxKind {
		return nil, nil, fmt.Errorf("%w: not a phone outbox backup", ErrNotATable)
	}
	rep := &Report{Rows: len(file.Records), Mapping: map[string]string{}, Findings: map[int][]capture.Finding{}}
	if file.StudyID != "" && file.StudyID != st.ID {
		rep.Problems = append(rep.Problems, Problem{Reason: fmt.Sprintf("the backup is of study %q, not %q", file.StudyID, st.ID)})
		return nil, rep, nil
	}
	var out []capture.Capture
	for i, raw := range file.Records {
		var c capture.Capture
		if err := json.Unmarshal(raw, &c); err != nil {
			rep.Problems = append(rep.Problems, Problem{Row: i + 1, Reason: "not a capture record: " + err.Error()})
			continue
		}
		c.StudyID = st.ID
		if c.Device == "" {
			c.Device = file.Device
		}
		// The record is kept as the phone made it: the occasion is derived
		// for the check only. The phone sends the same record when it
		// reaches the server later, and only an identical body is the
		// same revision; a body with the derived occasion written in
		// would be a second, conflicting version of every record.
		asSent := c.Occasion
		occFindings := capture.DeriveOccasion(st, &c)
		// As sent: a tag outside the study's series is a finding (the phone
		// saved it after a warning, and its push would be stored as sent).
		fs, errs, err := capture.ValidateCaptureAll(st, &c, true)
		fs = append(occFindings, fs...)
		c.Occasion = asSent // DeriveOccasion leaves an occasion set by hand alone
		if err != nil {
			rep.Problems = append(rep.Problems, Problem{Row: i + 1, Reason: err.Error()})
			continue
		}
		for _, ve := range errs {
			rep.Problems = append(rep.Problems, Problem{Row: i + 1, Column: ve.Field, Reason: ve.Message})
		}
		if len(errs) > 0 {
			continue
		}
		if len(fs) > 0 {
			rep.Findings[i+1] = fs
		}
		rep.Valid++
		out = append(out, c)
	}
	return out, rep, nil
}

// Import reads data (CSV, XLSX or a phone outbox backup) for study st and,
// unless dryRun or a problem was found, hands all records to write in one
// call so they land in one transaction. It returns the report either way;
// the error is ErrProblems when the file had problems.
func Import(st *capture.Study, data []byte, opts Options, dryRun bool, write func([]capture.Capture) error) (*Report, error) {
	var caps []capture.Capture
	var rep *Report
	if bytes.HasPrefix(bytes.TrimSpace(data), []byte("{")) {
		var err error
		caps, rep, err = ParseOutboxBackup(st, data)
		if err != nil {
			return &Report{Problems: []Problem{{Reason: err.Error()}}}, ErrProblems
		}
	} else {
		t, err := ReadTable(data, opts.Sheet)
		if err != nil {
			return &Report{Problems: []Problem{{Reason: err.Error()}}}, ErrProblems
		}
		caps, rep = ParseCaptures(st, t, opts)
	}
	if len(rep.Problems) > 0 {
		return rep, ErrProblems
	}
	if dryRun || len(caps) == 0 {
		return rep, nil
	}
	if err := write(caps); err != nil {
		return rep, fmt.Errorf("import: writing %d records: %w", len(caps), err)
	}
	rep.Written = len(caps)
	return rep, nil
}
