package capture

import (
	"errors"
	"fmt"
	"math"
	"regexp"
	"sort"
	"strings"
	"time"
	"unicode"

	"github.com/google/uuid"
)

// ErrInvalid is wrapped by every *ValidationError: the record or study was
// rejected and nothing was written.
var ErrInvalid = errors.New("invalid")

// ValidationError rejects one field of a study or capture. Field is the
// JSON name of the field (e.g. "tag_id", "occasions[2].end"), Message a
// sentence a crew member can act on. It wraps ErrInvalid, so both
// errors.As(err, &ve) and errors.Is(err, ErrInvalid) work; the HTTP layer
// answers 422 with {"error": Message, "field": Field}.
type ValidationError struct {
	Field   string
	Message string
}

// Error returns "FIELD: MESSAGE".
func (e *ValidationError) Error() string {
	if e.Field == "" {
		return e.Message
	}
	return e.Field + ": " + e.Message
}

// Unwrap returns ErrInvalid.
func (e *ValidationError) Unwrap() error { return ErrInvalid }

func invalid(field, format string, args ...any) *ValidationError {
	return &ValidationError{Field: field, Message: fmt.Sprintf(format, args...)}
}

// Finding is a soft problem with an accepted record: worth a look by the
// coordinator, not a reason to refuse field data (field data is messy and
// the person who saw the animal may be right). Code is a stable
// machine-readable name, Field the JSON field concerned.
type Finding struct {
	Code    string `json:"code"`
	Field   string `json:"field,omitempty"`
	Message string `json:"message"`
}

// Findings is a list of soft problems; empty when the record looks fine.
type Findings []Finding

// Has reports whether a finding with the given code is present.
func (fs Findings) Has(code string) bool {
	for _, f := range fs {
		if f.Code == code {
			return true
		}
	}
	return false
}

// Finding codes. They are part of the API: clients may key on them.
const (
	// FindingNeverMarked: a recapture, resight, retag or dead recovery of a
	// tag that no earlier record in the study marked.
	FindingNeverMarked = "never_marked"
	// FindingAlreadyMarked: a new mark (or the new tag of a retag) with a
	// tag that other records in the study already use.
	FindingAlreadyMarked = "tag_in_use"
	// FindingAfterLoss: the tag was recorded as died or removed (or found
	// dead) at an earlier time, yet is recorded again as alive.
	FindingAfterLoss = "after_loss"
	// FindingNoOccasion: captured_at falls inside no occasion window, so
	// the record belongs to no occasion and is left out of histories.
	FindingNoOccasion = "no_occasion"
	// FindingOutsideWindow: the occasion was set by hand but captured_at
	// falls outside that occasion's window.
	FindingOutsideWindow = "outside_window"
	// FindingMassRange: the mass is outside the study's plausible range
	// for the species.
	FindingMassRange = "mass_range"
	// FindingSpecies: the species is not one of the study's target species.
	FindingSpecies = "species_not_target"
	// FindingOldTagFormat: the old tag of a retag matches none of the
	// study's tag series (it may come from another study or an old series).
	FindingOldTagFormat = "old_tag_format"
	// FindingTagFormat: the tag matches none of the study's tag series.
	// Only ValidateCaptureAll as sent gives it; ValidateCapture refuses
	// the tag.
	FindingTagFormat = "tag_format"
	// FindingNoStation: the study has stations but the record names none.
	FindingNoStation = "no_station"
)

// maxText bounds free-text fields so one record cannot bloat the store.
const (
	maxIDLen    = 128
	maxNotesLen = 10000
)

// rules is a study compiled for checking many captures: the tag-series
// patterns compiled once, stations and occasions in maps.
type rules struct {
	st        *Study
	patterns  []*regexp.Regexp
	stations  map[string]bool
	occasions map[int]*Occasion
	species   map[string]bool
	mass      map[string]MassRange
	// seriesIsFinding: a tag outside the series is a finding, not a
	// refusal (ValidateCaptureAll as sent).
	seriesIsFinding bool
}

// compileRules validates the study and prepares it for checking captures.
func compileRules(st *Study) (*rules, error) {
	if err := st.Validate(); err != nil {
		return nil, err
	}
	r := &rules{
		st:        st,
		stations:  make(map[string]bool, len(st.Stations)),
		occasions: make(map[int]*Occasion, len(st.Occasions)),
		species:   make(map[string]bool, len(st.TargetSpecies)),
		mass:      make(map[string]MassRange, len(st.MassRanges)),
	}
	for _, ts := range st.TagSeries {
		// Validate has compiled it once already; it cannot fail here.
		r.patterns = append(r.patterns, regexp.MustCompile(anchor(ts.Pattern)))
	}
	for _, s := range st.Stations {
		r.stations[s.ID] = true
	}
	for i := range st.Occasions {
		r.occasions[st.Occasions[i].Index] = &st.Occasions[i]
	}
	for _, sp := range st.TargetSpecies {
		r.species[strings.ToLower(sp)] = true
	}
	for _, m := range st.MassRanges {
		r.mass[strings.ToLower(m.Species)] = m
	}
	return r, nil
}

// anchor makes a pattern match the whole string.
func anchor(p string) string { return `^(?:` + p + `)$` }

// Validate checks a study: an ID and a name, a known design, tag-series
// patterns that compile, occasions numbered 1..n without gaps whose windows
// (when given) have End after Start and do not overlap, primary periods for
// a robust design, unique station IDs with coordinates in range, and mass
// ranges with 0 <= min < max. It returns a *ValidationError (wrapping
// ErrInvalid) for the first problem found.
func (s *Study) Validate() error {
	if s == nil {
		return invalid("", "no study given")
	}
	if err := checkID("id", s.ID); err != nil {
		return err
	}
	if strings.TrimSpace(s.Name) == "" {
		return invalid("name", "the study needs a name")
	}
	switch s.Design {
	case DesignClosed, DesignOpen, DesignRobust:
	default:
		return invalid("design", "design %q is not one of closed, open, robust", s.Design)
	}
	if s.AreaHectares < 0 || !finite(s.AreaHectares) {
		return invalid("area_ha", "area must be a finite number of hectares, 0 or more; got %v", s.AreaHectares)
	}
	for i, ts := range s.TagSeries {
		f := fmt.Sprintf("tag_series[%d].pattern", i)
		if strings.TrimSpace(ts.Pattern) == "" {
			return invalid(f, "tag series %q has an empty pattern", ts.Name)
		}
		if _, err := regexp.Compile(anchor(ts.Pattern)); err != nil {
			return invalid(f, "tag series %q: pattern %q is not a valid regular expression: %v", ts.Name, ts.Pattern, err)
		}
	}
	for i, m := range s.MassRanges {
		f := fmt.Sprintf("mass_ranges[%d]", i)
		if strings.TrimSpace(m.Species) == "" {
			return invalid(f+".species", "a mass range needs a species")
		}
		if !finite(m.MinG) || !finite(m.MaxG) || m.MinG < 0 || m.MaxG <= m.MinG {
			return invalid(f, "mass range for %s must have 0 <= min_g < max_g; got %v..%v", m.Species, m.MinG, m.MaxG)
		}
	}
	if err := s.validateOccasions(); err != nil {
		return err
	}
	seen := make(map[string]bool, len(s.Stations))
	for i, st := range s.Stations {
		f := fmt.Sprintf("stations[%d]", i)
		if err := checkID(f+".id", st.ID); err != nil {
			return err
		}
		if seen[st.ID] {
			return invalid(f+".id", "station ID %q is used twice", st.ID)
		}
		seen[st.ID] = true
		switch st.Kind {
		case "", StationTrap, StationNet, StationTransect, StationOther:
		default:
			return invalid(f+".kind", "station kind %q is not one of trap, net, transect point, other", st.Kind)
		}
		if err := checkLatLon(f+".", st.Lat, st.Lon); err != nil {
			return err
		}
		if (st.GridX == nil) != (st.GridY == nil) {
			return invalid(f+".grid_x_m", "give both grid_x_m and grid_y_m or neither")
		}
		if st.GridX != nil && (!finite(*st.GridX) || !finite(*st.GridY)) {
			return invalid(f+".grid_x_m", "grid coordinates must be finite numbers of metres")
		}
	}
	return nil
}

func (s *Study) validateOccasions() error {
	byIndex := make([]*Occasion, len(s.Occasions)+1)
	for i := range s.Occasions {
		o := &s.Occasions[i]
		f := fmt.Sprintf("occasions[%d]", i)
		if o.Index < 1 || o.Index > len(s.Occasions) {
			return invalid(f+".index", "occasion index %d is out of range: occasions are numbered 1 to %d", o.Index, len(s.Occasions))
		}
		if byIndex[o.Index] != nil {
			return invalid(f+".index", "occasion %d is listed twice", o.Index)
		}
		byIndex[o.Index] = o
		if o.Start.IsZero() != o.End.IsZero() {
			return invalid(f+".end", "occasion %d: give both start and end, or neither", o.Index)
		}
		if !o.Start.IsZero() && !o.End.After(o.Start) {
			return invalid(f+".end", "occasion %d ends (%s) before it starts (%s)", o.Index, o.End.Format(time.RFC3339), o.Start.Format(time.RFC3339))
		}
		if s.Design == DesignRobust && o.Primary < 1 {
			return invalid(f+".primary", "occasion %d: a robust design needs the primary period (1 or more) of every occasion", o.Index)
		}
		if s.Design != DesignRobust && o.Primary != 0 {
			return invalid(f+".primary", "occasion %d: primary periods are only for a robust design", o.Index)
		}
	}
	// Windows in index order must not overlap, and primary periods must not
	// go backwards.
	var prevTimed *Occasion
	for k, o := range byIndex[1:] {
		if k > 0 && s.Design == DesignRobust && o.Primary < byIndex[k].Primary {
			p := byIndex[k]
			return invalid("occasions", "occasion %d is in primary period %d, before occasion %d's period %d", o.Index, o.Primary, p.Index, p.Primary)
		}
		if o.Start.IsZero() {
			continue
		}
		if prevTimed != nil && o.Start.Before(prevTimed.End) {
			return invalid("occasions", "occasion %d starts (%s) before occasion %d ends (%s): windows must follow each other in time", o.Index, o.Start.Format(time.RFC3339), prevTimed.Index, prevTimed.End.Format(time.RFC3339))
		}
		prevTimed = o
	}
	return nil
}

// OccasionAt returns the index of the occasion whose window [Start, End)
// contains t, or 0 when none does (or the occasions have no windows).
func (s *Study) OccasionAt(t time.Time) int {
	for _, o := range s.Occasions {
		if o.Start.IsZero() {
			continue
		}
		if !t.Before(o.Start) && t.Before(o.End) {
			return o.Index
		}
	}
	return 0
}

// DeriveOccasion sets c.Occasion from c.CapturedAt and the study's occasion
// windows, unless c.OccasionSetByHand is true. It reports a
// FindingNoOccasion when no window contains the time.
func DeriveOccasion(st *Study, c *Capture) Findings {
	if c.OccasionSetByHand {
		return nil
	}
	c.Occasion = st.OccasionAt(c.CapturedAt)
	if c.Occasion == 0 && !c.CapturedAt.IsZero() {
		return Findings{{Code: FindingNoOccasion, Field: "captured_at",
			Message: fmt.Sprintf("%s falls in no occasion window of the study; the record is kept but left out of capture histories until its time or occasion is corrected", c.CapturedAt.Format(time.RFC3339))}}
	}
	return nil
}

// ValidateCapture checks one capture against its study and returns soft
// findings for an accepted record, or a *ValidationError (wrapping
// ErrInvalid) naming the first rejected field. It does not derive the
// occasion (see DeriveOccasion) and cannot see other records, so findings
// that need the store (FindingNeverMarked, FindingAlreadyMarked,
// FindingAfterLoss) come from the Store or Tx.Prepare instead.
//
// Rejected: an ID that is not a UUID, a study mismatch, a tag ID that is
// empty, has control characters or matches none of the tag series (whole
// string), an unknown event/sex/age/fate, a retag without an old tag or with
// old tag = new tag, an old tag on another event, a hand-set occasion not in
// the study, an unknown station, a zero captured_at, latitude outside
// -90..90, longitude outside -180..180, negative accuracy, mass <= 0,
// non-finite numbers, a dead recovery whose fate is "released".
func ValidateCapture(st *Study, c *Capture) (Findings, error) {
	r, err := compileRules(st)
	if err != nil {
		return nil, fmt.Errorf("study %q: %w", st.ID, err)
	}
	return r.check(c)
}

// ValidateCaptureAll is ValidateCapture reporting every rejected field
// instead of the first, so that an import can list all of a row's problems
// at once. The findings are nil when a field is rejected; the error is for
// a study that does not validate.
//
// asSent checks a record as another device sent it (a phone's outbox
// backup): a tag outside the study's tag series is then a finding
// (FindingTagFormat), not a refusal, because the phone lets its crew save
// such a tag after a warning and sync stores it as sent, so a backup of
// the same records must not be refused for it (the data checks list it as
// tag_outside_series).
func ValidateCaptureAll(st *Study, c *Capture, asSent bool) (Findings, []*ValidationError, error) {
	r, err := compileRules(st)
	if err != nil {
		return nil, nil, fmt.Errorf("study %q: %w", st.ID, err)
	}
	r.seriesIsFinding = asSent
	fs, errs := r.checkAll(c)
	if len(errs) > 0 {
		fs = nil
	}
	return fs, errs, nil
}

// check is checkAll reporting only the first rejected field, as
// ValidateCapture does.
func (r *rules) check(c *Capture) (Findings, error) {
	fs, errs := r.checkAll(c)
	if len(errs) > 0 {
		return nil, errs[0]
	}
	return fs, nil
}

// checkAll returns the findings and every rejected field, in the order
// the fields are checked. The findings mean nothing when a field is
// rejected.
func (r *rules) checkAll(c *Capture) (fs Findings, errs []*ValidationError) {
	if c == nil {
		return nil, []*ValidationError{invalid("", "no capture given")}
	}
	bad := func(err error) {
		var ve *ValidationError
		if !errors.As(err, &ve) {
			ve = invalid("", "%v", err)
		}
		errs = append(errs, ve)
	}
	if c.ID != "" {
		if _, err := uuid.Parse(c.ID); err != nil {
			bad(invalid("id", "capture ID %q is not a UUID", c.ID))
		}
	}
	if c.StudyID != r.st.ID {
		bad(invalid("study_id", "the record names study %q but is being stored in study %q", c.StudyID, r.st.ID))
	}
	switch c.Event {
	case EventNewMark, EventRecapture, EventResight, EventRetag, EventDeadRecovery:
	case "":
		bad(invalid("event", "say what happened: new, recapture, resight, retag or dead"))
	default:
		bad(invalid("event", "event %q is not one of new, recapture, resight, retag, dead", c.Event))
	}
	if err := checkTagText("tag_id", c.TagID); err != nil {
		bad(err)
	} else if msg := r.outsideSeries(c.TagID); msg != "" {
		if r.seriesIsFinding {
			fs = append(fs, Finding{Code: FindingTagFormat, Field: "tag_id", Message: msg})
		} else {
			bad(invalid("tag_id", "%s", msg))
		}
	}
	if c.Event == EventRetag {
		if c.OldTagID == "" {
			bad(invalid("old_tag_id", "a retag needs the old tag ID that was replaced"))
		} else if err := checkTagText("old_tag_id", c.OldTagID); err != nil {
			bad(err)
		} else if c.OldTagID == c.TagID {
			bad(invalid("old_tag_id", "the old tag ID is the same as the new one (%q); a retag replaces one tag with another", c.TagID))
		} else if len(r.patterns) > 0 && !r.matchTag(c.OldTagID) {
			fs = append(fs, Finding{Code: FindingOldTagFormat, Field: "old_tag_id",
				Message: fmt.Sprintf("old tag %q matches none of the study's tag series", c.OldTagID)})
		}
	} else if c.OldTagID != "" {
		bad(invalid("old_tag_id", "old_tag_id is only for retag events; this event is %q", c.Event))
	}
	switch c.Sex {
	case "", SexFemale, SexMale, SexUnknown:
	default:
		bad(invalid("sex", "sex %q is not one of female, male, unknown", c.Sex))
	}
	switch c.Age {
	case "", AgeJuvenile, AgeSubadult, AgeAdult, AgeUnknown:
	default:
		bad(invalid("age", "age class %q is not one of juvenile, subadult, adult, unknown", c.Age))
	}
	switch c.Fate {
	case "", FateReleased, FateDied, FateRemoved:
	default:
		bad(invalid("fate", "fate %q is not one of released, died, removed", c.Fate))
	}
	if c.Event == EventDeadRecovery && c.Fate == FateReleased {
		bad(invalid("fate", "a dead recovery cannot have fate \"released\"; leave it empty or say died"))
	}
	if c.CapturedAt.IsZero() {
		bad(invalid("captured_at", "the date and time of the capture is missing"))
	}
	if c.OccasionSetByHand {
		o := r.occasions[c.Occasion]
		if o == nil {
			bad(invalid("occasion", "occasion %d is not in the study (it has occasions 1 to %d)", c.Occasion, len(r.st.Occasions)))
		} else if !o.Start.IsZero() && (c.CapturedAt.Before(o.Start) || !c.CapturedAt.Before(o.End)) {
			fs = append(fs, Finding{Code: FindingOutsideWindow, Field: "occasion",
				Message: fmt.Sprintf("occasion %d was set by hand but %s is outside its window", c.Occasion, c.CapturedAt.Format(time.RFC3339))})
		}
	} else if c.Occasion != 0 && r.occasions[c.Occasion] == nil {
		bad(invalid("occasion", "occasion %d is not in the study (it has occasions 1 to %d)", c.Occasion, len(r.st.Occasions)))
	}
	if c.StationID != "" {
		if !r.stations[c.StationID] {
			bad(invalid("station_id", "station %q is not one of the study's stations", c.StationID))
		}
	} else if len(r.stations) > 0 && c.Event != EventResight && c.Event != EventDeadRecovery {
		fs = append(fs, Finding{Code: FindingNoStation, Field: "station_id", Message: "no station given for a capture in a study with stations"})
	}
	if err := checkLatLon("", c.Lat, c.Lon); err != nil {
		bad(err)
	}
	if c.AccuracyM != nil && (!finite(*c.AccuracyM) || *c.AccuracyM < 0) {
		bad(invalid("accuracy_m", "GPS accuracy must be 0 or more metres; got %v", *c.AccuracyM))
	}
	if c.MassG != nil {
		m := *c.MassG
		if !finite(m) || m <= 0 {
			bad(invalid("mass_g", "mass must be more than 0 grams; got %v", m))
		} else if mr, ok := r.mass[strings.ToLower(c.Species)]; ok && (m < mr.MinG || m > mr.MaxG) {
			fs = append(fs, Finding{Code: FindingMassRange, Field: "mass_g",
				Message: fmt.Sprintf("%v g is outside the plausible range %v-%v g for %s", m, mr.MinG, mr.MaxG, mr.Species)})
		}
	}
	if c.Species != "" && len(r.species) > 0 && !r.species[strings.ToLower(c.Species)] {
		fs = append(fs, Finding{Code: FindingSpecies, Field: "species",
			Message: fmt.Sprintf("species %q is not a target species of the study", c.Species)})
	}
	for i, m := range c.Measurements {
		f := fmt.Sprintf("measurements[%d]", i)
		if strings.TrimSpace(m.Name) == "" {
			bad(invalid(f+".name", "a measurement needs a name"))
		} else if !finite(m.Value) {
			bad(invalid(f+".value", "measurement %q must be a finite number", m.Name))
		}
	}
	for _, t := range []struct{ field, v string }{{"observer", c.Observer}, {"device", c.Device}, {"species", c.Species}, {"station_id", c.StationID}} {
		if len(t.v) > maxIDLen {
			bad(invalid(t.field, "%s is longer than %d characters", t.field, maxIDLen))
		}
	}
	if len(c.Notes) > maxNotesLen {
		bad(invalid("notes", "notes are longer than %d characters", maxNotesLen))
	}
	return fs, errs
}

func (r *rules) matchTag(tag string) bool {
	for _, p := range r.patterns {
		if p.MatchString(tag) {
			return true
		}
	}
	return false
}

// outsideSeries says why tag matches none of the study's tag series, or
// "" when it matches one (or the study has none).
func (r *rules) outsideSeries(tag string) string {
	if len(r.patterns) == 0 || r.matchTag(tag) {
		return ""
	}
	return fmt.Sprintf("tag %q matches none of the study's tag series: %s", tag, r.seriesNames())
}

// seriesNames lists the study's tag series as "name (pattern)", sorted.
func (r *rules) seriesNames() string {
	names := make([]string, len(r.st.TagSeries))
	for i, ts := range r.st.TagSeries {
		names[i] = fmt.Sprintf("%s (%s)", ts.Name, ts.Pattern)
	}
	sort.Strings(names)
	return strings.Join(names, ", ")
}

// checkTagText rejects empty tags, surrounding spaces and control
// characters (the tag index uses 0x00 as a separator).
func checkTagText(field, tag string) error {
	if tag == "" {
		return invalid(field, "the tag ID is missing")
	}
	if strings.TrimSpace(tag) != tag {
		return invalid(field, "tag %q has spaces at the start or end", tag)
	}
	if len(tag) > maxIDLen {
		return invalid(field, "tag ID is longer than %d characters", maxIDLen)
	}
	for _, r := range tag {
		if unicode.IsControl(r) || r == unicode.ReplacementChar {
			return invalid(field, "tag %q contains a control or invalid character", tag)
		}
	}
	return nil
}

// checkID accepts a non-empty identifier without control characters or
// the 0x00 byte used as a key separator.
func checkID(field, id string) error {
	if strings.TrimSpace(id) == "" {
		return invalid(field, "the ID is missing")
	}
	if len(id) > maxIDLen {
		return invalid(field, "ID is longer than %d characters", maxIDLen)
	}
	for _, r := range id {
		if unicode.IsControl(r) || r == unicode.ReplacementChar {
			return invalid(field, "ID %q contains a control or invalid character", id)
		}
	}
	return nil
}

func checkLatLon(prefix string, lat, lon *float64) error {
	if (lat == nil) != (lon == nil) {
		return invalid(prefix+"lat", "give both latitude and longitude, or neither")
	}
	if lat == nil {
		return nil
	}
	if !finite(*lat) || *lat < -90 || *lat > 90 {
		return invalid(prefix+"lat", "latitude must be between -90 and 90 degrees; got %v", *lat)
	}
	if !finite(*lon) || *lon < -180 || *lon > 180 {
		return invalid(prefix+"lon", "longitude must be between -180 and 180 degrees; got %v", *lon)
	}
	return nil
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }
