package capture

import (
	"fmt"
	"sort"
	"strconv"
	"strings"
	"time"
)

// Check is one data problem the coordinator should look at: what kind it
// is (Code, stable, part of the API), a title and an explanation in plain
// words, how it may bias the estimates, and the records involved so that a
// user interface can link to them.
//
// Checks never change data. They are computed afresh from the stored
// records every time (see Store.Checks), so a check disappears once the
// records are corrected.
type Check struct {
	Code string `json:"code"`
	// Severity is "problem" (the records are almost certainly wrong) or
	// "caution" (worth a look; the records may be right).
	Severity    string `json:"severity"`
	Title       string `json:"title"`
	Explanation string `json:"explanation"`
	// Advice says what to do about it.
	Advice string `json:"advice"`
	// AffectsEstimates is true when the problem changes the capture
	// histories or covariates the estimators use; Effect says how.
	AffectsEstimates bool   `json:"affects_estimates"`
	Effect           string `json:"effect,omitempty"`
	// CaptureIDs are the records involved, oldest first.
	CaptureIDs []string `json:"capture_ids"`
	// Tags are the tags involved (a whole retag chain when the check is
	// about an animal).
	Tags []string `json:"tags,omitempty"`
	// Devices are the devices involved (clock and duplicate checks).
	Devices []string `json:"devices,omitempty"`
	// Occasion is the occasion concerned, 0 if none in particular.
	Occasion int `json:"occasion,omitempty"`
}

// Check codes. They are part of the API: clients may key on them.
const (
	CheckNeverMarked     = "never_marked"
	CheckMarkedTwice     = "marked_twice"
	CheckSexChanged      = "sex_changed"
	CheckSpeciesChanged  = "species_changed"
	CheckAgeBackwards    = "age_backwards"
	CheckOutsideOccasion = "outside_occasions"
	CheckUnknownStation  = "unknown_station"
	CheckTagSeries       = "tag_outside_series"
	CheckLikelyDuplicate = "likely_duplicate"
	CheckMassRange       = "mass_out_of_range"
	CheckNoStation       = "no_station"
	CheckNoTime          = "no_time"
	CheckClockSkew       = "clock_skew"
	CheckEditConflict    = "edit_conflict"
)

// Severities of a Check.
const (
	SeverityProblem = "problem"
	SeverityCaution = "caution"
)

// CheckKind describes one kind of check: the fixed parts of every Check
// with that code.
type CheckKind struct {
	Code             string `json:"code"`
	Severity         string `json:"severity"`
	Title            string `json:"title"`
	Advice           string `json:"advice"`
	AffectsEstimates bool   `json:"affects_estimates"`
	Effect           string `json:"effect,omitempty"`
}

// CheckKinds lists every kind of check in the order RunChecks reports
// them (most consequential first).
var CheckKinds = []CheckKind{
	{CheckNeverMarked, SeverityProblem, "Recapture of a tag that was never marked",
		"Look for a misread tag: compare the record with animals caught at the same station and time, then correct the tag, or change the event to a new mark if the animal really was marked then.",
		true, "The tag counts as a separate animal, usually caught once: that adds a false new animal and pushes population estimates up."},
	{CheckMarkedTwice, SeverityProblem, "Tag marked as new more than once",
		"Decide whether the tag was reused or misread. Correct the tag of the wrong record, or change a repeat \"new\" to a recapture.",
		true, "Two animals may be merged into one capture history (estimates too low) or one animal's first capture is recorded twice."},
	{CheckSexChanged, SeverityProblem, "Sex recorded differently for one animal",
		"Check the handlers' notes and the animal's other captures; correct the wrong record or set sex to unknown.",
		true, "The latest sex is used, which changes sex ratios and any model with sex as a group or covariate."},
	{CheckSpeciesChanged, SeverityProblem, "Species recorded differently for one animal",
		"A tag read on another species usually means a misread tag; correct the species or the tag.",
		true, "The animal may be counted in the wrong species' estimate."},
	{CheckAgeBackwards, SeverityCaution, "Age class goes backwards",
		"An animal judged adult and later juvenile or subadult: correct one of the records, or set age to unknown where unsure.",
		true, "Age structure and any model using age use the latest age class."},
	{CheckOutsideOccasion, SeverityProblem, "Capture outside the study's occasions",
		"Correct the date and time, set the occasion by hand, or add the missing occasion to the study.",
		true, "The record is left out of the capture histories until fixed: captures are lost to the estimators."},
	{CheckUnknownStation, SeverityProblem, "Capture at a station the study does not have",
		"Correct the station, or add the station to the study.",
		true, "Spatial summaries and density cannot place the capture."},
	{CheckTagSeries, SeverityProblem, "Tag that matches none of the study's tag series",
		"Compare the tag with the animal in hand or the field sheet: a tag outside the study's series is usually a typing slip or a misread digit. Correct the tag, or add the series to the study if the tag really belongs to it.",
		true, "The tag counts as an animal of its own: a mistyped recapture adds a false animal caught once, which pushes population estimates up."},
	{CheckLikelyDuplicate, SeverityProblem, "Same animal entered twice on one occasion from different devices",
		"Compare the records; if they are one capture entered twice, delete the extra one. If the animal really was caught twice, leave both.",
		false, "A second capture on one occasion does not change the 0/1 capture history, but it inflates capture counts and mass summaries."},
	{CheckMassRange, SeverityProblem, "Mass outside the plausible range for the species",
		"Look for a slipped decimal point or a mass weighed with the bag; correct or remove the mass.",
		true, "Mass summaries and any model with mass as a covariate use the wrong value."},
	{CheckNoStation, SeverityCaution, "Capture with no station",
		"Fill in the station from the field sheet if it is known.",
		true, "Spatial summaries and density leave the capture out; capture histories are not affected."},
	{CheckNoTime, SeverityProblem, "Record with no date and time",
		"Fill in the date and time, or set the occasion by hand.",
		true, "Without a time the occasion cannot be derived and the record is left out of the capture histories."},
	{CheckClockSkew, SeverityCaution, "Device clock may be wrong",
		"Check the phone's date, time and time zone settings; correct the capture times of the records listed if they are off.",
		true, "Capture times decide the occasion: a wrong clock can put captures on the wrong occasion or on none."},
	{CheckEditConflict, SeverityProblem, "Record edited on two devices at once",
		"Open the record's versions side by side and choose one (or merge by hand). Until then the provisional version chosen by sync is used.",
		true, "The provisional version may not be the right one."},
}

func kindOf(code string) CheckKind {
	for _, k := range CheckKinds {
		if k.Code == code {
			return k
		}
	}
	return CheckKind{Code: code, Severity: SeverityCaution, Title: code}
}

// Clock-skew thresholds. A record cannot be written before the animal is
// caught, so a capture time later than the record's revision stamp means
// the clock that set the capture time was ahead of the clock that stamped
// the record (SkewAhead allows for rounding and typed times). A device
// whose every record was stamped long after its capture time may have a
// clock that is behind (or its crew entered everything later from paper),
// so that finding needs SkewMinRecords records, each at least SkewBehind
// late, and is worded as a possibility.
const (
	SkewAhead      = 10 * time.Minute
	SkewBehind     = 6 * time.Hour
	SkewMinRecords = 3
)

// Checks runs RunChecks over a study's stored, non-deleted captures.
func (s *Store) Checks(studyID string) ([]Check, error) {
	st, err := s.GetStudy(studyID)
	if err != nil {
		return nil, fmt.Errorf("data checks: study %q: %w", studyID, err)
	}
	caps, err := s.Captures(studyID, false)
	if err != nil {
		return nil, fmt.Errorf("data checks: %w", err)
	}
	return RunChecks(st, caps), nil
}

// RunChecks finds data problems in a study's capture records. It is pure:
// the same study and records give the same checks in the same order
// (CheckKinds order, then by the time of the first record involved).
// Deleted records and records of another study are ignored.
//
// Animals are tag chains, as in capture histories: a retag joins its old
// and new tag, so a recapture of the new tag is not "never marked" and a
// sex change across a retag is still found. The chains are the ones
// BuildHistories makes.
//
// The checks:
//   - never_marked: an animal's earliest timed record is not a new mark;
//   - marked_twice: an animal has more than one new-mark record;
//   - sex_changed, species_changed: an animal recorded as both female and
//     male, or as two species (case ignored);
//   - age_backwards: an age class earlier in the order juvenile, subadult,
//     adult than one recorded before it;
//   - outside_occasions: a record with a time in no occasion window (or a
//     hand-set occasion the study does not have);
//   - unknown_station: a station ID the study does not list;
//   - tag_outside_series: a tag ID that matches none of the study's tag
//     series (the study's own writes refuse such a tag, but records from
//     phones and peers are stored as sent, see package sync, so this is
//     where the coordinator sees them); the old tag of a retag may come
//     from elsewhere and is not checked;
//   - likely_duplicate: an animal with in-hand records (new mark,
//     recapture, retag) on one occasion from two or more devices;
//   - mass_out_of_range: a mass outside the study's range for the record's
//     species;
//   - no_station: a capture in hand with no station in a study that has
//     stations; no_time: a record with no capture time;
//   - clock_skew: per device, records whose capture time is more than
//     SkewAhead after their revision stamp (the hybrid logical clock
//     reading written by sync, see Revision.Stamp), or every one of at
//     least SkewMinRecords records whose revision the device stamped
//     itself more than SkewBehind before it (a record edited later on
//     another device says nothing of this one's clock); records without
//     a readable stamp are skipped;
//   - edit_conflict: a record whose revisions conflict (Revision.Conflict).
func RunChecks(st *Study, caps []Capture) []Check {
	recs := make([]*Capture, 0, len(caps))
	for i := range caps {
		c := &caps[i]
		if c.Revision.Deleted || c.StudyID != st.ID {
			continue
		}
		recs = append(recs, c)
	}
	sort.SliceStable(recs, func(a, b int) bool {
		if !recs[a].CapturedAt.Equal(recs[b].CapturedAt) {
			return recs[a].CapturedAt.Before(recs[b].CapturedAt)
		}
		return recs[a].ID < recs[b].ID
	})
	ck := &checker{st: st, stations: map[string]bool{}, occasions: map[int]bool{}}
	if r, err := compileRules(st); err == nil {
		ck.rules = r // a study that fails validation gets no tag-series check
	}
	for _, s := range st.Stations {
		ck.stations[s.ID] = true
	}
	for _, o := range st.Occasions {
		ck.occasions[o.Index] = true
	}
	ck.perRecord(recs)
	ck.perAnimal(recs, chainsOf(st, recs))
	ck.perDevice(recs)

	rank := make(map[string]int, len(CheckKinds))
	for i, k := range CheckKinds {
		rank[k.Code] = i
	}
	sort.SliceStable(ck.out, func(a, b int) bool {
		return rank[ck.out[a].Code] < rank[ck.out[b].Code]
	})
	return ck.out
}

type checker struct {
	st        *Study
	rules     *rules // nil when the study does not validate
	stations  map[string]bool
	occasions map[int]bool
	out       []Check
}

func (ck *checker) add(code, explanation string, recs []*Capture, tags, devices []string, occasion int) {
	k := kindOf(code)
	c := Check{
		Code: code, Severity: k.Severity, Title: k.Title, Explanation: explanation,
		Advice: k.Advice, AffectsEstimates: k.AffectsEstimates, Effect: k.Effect,
		CaptureIDs: make([]string, len(recs)), Tags: tags, Devices: devices, Occasion: occasion,
	}
	for i, r := range recs {
		c.CaptureIDs[i] = r.ID
	}
	if c.Tags == nil {
		for _, r := range recs {
			c.Tags = appendNew(c.Tags, r.TagID)
		}
	}
	ck.out = append(ck.out, c)
}

func appendNew(list []string, s string) []string {
	if s == "" {
		return list
	}
	for _, have := range list {
		if have == s {
			return list
		}
	}
	return append(list, s)
}

// occasionOf is the record's hand-set occasion, else the one its time
// falls in (0 for none), as BuildHistories derives it.
func (ck *checker) occasionOf(c *Capture) int {
	if c.OccasionSetByHand {
		return c.Occasion
	}
	return ck.st.OccasionAt(c.CapturedAt)
}

func inHand(e Event) bool {
	return e == EventNewMark || e == EventRecapture || e == EventRetag
}

func when(t time.Time) string { return t.UTC().Format("2006-01-02 15:04 MST") }

// describe names a record for an explanation: "recapture of QH-0012 on
// 2026-06-09 06:12 UTC at C4 (phone-ines)".
func describe(c *Capture) string {
	var b strings.Builder
	b.WriteString(string(c.Event))
	b.WriteString(" of ")
	if c.Event == EventRetag && c.OldTagID != "" {
		b.WriteString(c.OldTagID + " to ")
	}
	b.WriteString(c.TagID)
	if !c.CapturedAt.IsZero() {
		b.WriteString(" on " + when(c.CapturedAt))
	}
	if c.StationID != "" {
		b.WriteString(" at " + c.StationID)
	}
	if c.Device != "" {
		b.WriteString(" (" + c.Device + ")")
	}
	return b.String()
}

// perRecord runs the checks that need one record only.
func (ck *checker) perRecord(recs []*Capture) {
	mass := make(map[string]MassRange, len(ck.st.MassRanges))
	for _, m := range ck.st.MassRanges {
		mass[strings.ToLower(m.Species)] = m
	}
	for _, c := range recs {
		one := []*Capture{c}
		if c.Revision.Conflict {
			ck.add(CheckEditConflict, fmt.Sprintf("The record (%s) has versions edited on different devices that do not descend from each other; both are kept.", describe(c)), one, nil, nil, 0)
		}
		if c.CapturedAt.IsZero() {
			if !c.OccasionSetByHand {
				ck.add(CheckNoTime, fmt.Sprintf("The record (%s) has no capture time and no occasion set by hand.", describe(c)), one, nil, nil, 0)
			} else {
				ck.add(CheckNoTime, fmt.Sprintf("The record (%s) has no capture time; its occasion %d was set by hand.", describe(c), c.Occasion), one, nil, nil, c.Occasion)
			}
		}
		if occ := ck.occasionOf(c); !ck.occasions[occ] && (c.OccasionSetByHand || !c.CapturedAt.IsZero()) {
			msg := fmt.Sprintf("The record (%s) falls in none of the study's occasion windows.", describe(c))
			if c.OccasionSetByHand {
				msg = fmt.Sprintf("The record (%s) names occasion %d, which the study does not have.", describe(c), c.Occasion)
			}
			ck.add(CheckOutsideOccasion, msg, one, nil, nil, 0)
		}
		if c.StationID != "" && !ck.stations[c.StationID] {
			ck.add(CheckUnknownStation, fmt.Sprintf("The record (%s) names station %q, which is not one of the study's %d stations.", describe(c), c.StationID, len(ck.st.Stations)), one, nil, nil, ck.occasionOf(c))
		}
		if ck.rules != nil && ck.rules.outsideSeries(c.TagID) != "" {
			ck.add(CheckTagSeries, fmt.Sprintf("The record (%s) has tag %q, which matches none of the study's tag series (%s).",
				describe(c), c.TagID, ck.rules.seriesNames()), one, nil, nil, ck.occasionOf(c))
		}
		if c.StationID == "" && len(ck.st.Stations) > 0 && c.Event != EventResight && c.Event != EventDeadRecovery {
			ck.add(CheckNoStation, fmt.Sprintf("The record (%s) names no station.", describe(c)), one, nil, nil, ck.occasionOf(c))
		}
		if c.MassG != nil {
			if mr, ok := mass[strings.ToLower(c.Species)]; ok && (*c.MassG < mr.MinG || *c.MassG > mr.MaxG) {
				ck.add(CheckMassRange, fmt.Sprintf("The record (%s) gives %s g; the study's plausible range for %s is %s to %s g.",
					describe(c), fmtG(*c.MassG), mr.Species, fmtG(mr.MinG), fmtG(mr.MaxG)), one, nil, nil, ck.occasionOf(c))
			}
		}
	}
}

func fmtG(g float64) string { return strconv.FormatFloat(g, 'f', -1, 64) }

// chainsOf groups records into animals by their tag chains, using
// BuildHistories' chain rule rather than a second copy of it. Histories
// leave out records in no occasion and animals never caught in hand, so
// the records are passed in as copies that all count: every copy is set
// by hand to the study's first occasion and counted as a capture. The
// result maps each tag to its chain's tags (oldest first). It returns nil
// if histories cannot be built (a study with no occasions); callers then
// treat each tag as its own animal.
func chainsOf(st *Study, recs []*Capture) map[string][]string {
	if len(st.Occasions) == 0 {
		return nil
	}
	first := st.Occasions[0].Index
	for _, o := range st.Occasions {
		first = min(first, o.Index)
	}
	copies := make([]Capture, len(recs))
	for i, c := range recs {
		copies[i] = Capture{ID: c.ID, StudyID: c.StudyID, TagID: c.TagID, OldTagID: c.OldTagID,
			Event: c.Event, CapturedAt: c.CapturedAt, Occasion: first, OccasionSetByHand: true}
		if c.Event != EventRetag {
			copies[i].Event, copies[i].OldTagID = EventRecapture, ""
		}
	}
	hs, err := BuildHistories(st, copies, nil)
	if err != nil {
		return nil
	}
	out := make(map[string][]string)
	for _, a := range hs.Animals {
		for _, t := range a.Tags {
			out[t] = a.Tags
		}
	}
	return out
}

// ageRank orders age classes; unknown and empty are not ranked.
func ageRank(a AgeClass) int {
	switch a {
	case AgeJuvenile:
		return 1
	case AgeSubadult:
		return 2
	case AgeAdult:
		return 3
	}
	return 0
}

// perAnimal runs the checks over each animal's records.
func (ck *checker) perAnimal(recs []*Capture, chains map[string][]string) {
	type animal struct {
		tags []string
		recs []*Capture
	}
	byKey := map[string]*animal{}
	var order []string
	for _, c := range recs {
		tags := chains[c.TagID]
		if tags == nil {
			tags = []string{c.TagID}
		}
		key := tags[0]
		a := byKey[key]
		if a == nil {
			a = &animal{tags: tags}
			byKey[key] = a
			order = append(order, key)
		}
		a.recs = append(a.recs, c)
	}
	for _, key := range order {
		a := byKey[key]
		chain := strings.Join(a.tags, " > ")
		name := "Tag " + chain
		if len(a.tags) > 1 {
			name = "The animal with tags " + chain
		}

		// Never marked: records before the first new mark, in time order
		// (records with no time are checked by no_time instead).
		var before []*Capture
		marked := false
		var marks []*Capture
		for _, c := range a.recs {
			if c.Event == EventNewMark {
				marks = append(marks, c)
				marked = true
				continue
			}
			if !marked && !c.CapturedAt.IsZero() {
				before = append(before, c)
			}
		}
		if len(before) > 0 {
			msg := fmt.Sprintf("%s: %s, but no record marks it.", name, describe(before[0]))
			if len(marks) > 0 {
				msg = fmt.Sprintf("%s: %s, before the tag was marked (%s).", name, describe(before[0]), describe(marks[0]))
			}
			if len(before) > 1 {
				msg += fmt.Sprintf(" %d records come before any new mark.", len(before))
			}
			ck.add(CheckNeverMarked, msg, before, a.tags, nil, ck.occasionOf(before[0]))
		}
		if len(marks) > 1 {
			parts := make([]string, len(marks))
			for i, c := range marks {
				parts[i] = describe(c)
			}
			ck.add(CheckMarkedTwice, fmt.Sprintf("%s is marked as new %d times: %s.", name, len(marks), strings.Join(parts, "; ")), marks, a.tags, nil, 0)
		}

		// Sex and species.
		var females, males []*Capture
		species := map[string][]*Capture{}
		var spOrder []string
		for _, c := range a.recs {
			switch c.Sex {
			case SexFemale:
				females = append(females, c)
			case SexMale:
				males = append(males, c)
			}
			if c.Species != "" {
				k := strings.ToLower(c.Species)
				if species[k] == nil {
					spOrder = append(spOrder, c.Species)
				}
				species[k] = append(species[k], c)
			}
		}
		if len(females) > 0 && len(males) > 0 {
			involved := mergeByTime(females, males)
			ck.add(CheckSexChanged, fmt.Sprintf("%s is recorded female %s and male %s.", name, times(len(females)), times(len(males))), involved, a.tags, nil, 0)
		}
		if len(spOrder) > 1 {
			var involved []*Capture
			parts := make([]string, len(spOrder))
			for i, sp := range spOrder {
				rs := species[strings.ToLower(sp)]
				involved = mergeByTime(involved, rs)
				parts[i] = fmt.Sprintf("%s %s", sp, times(len(rs)))
			}
			ck.add(CheckSpeciesChanged, fmt.Sprintf("%s is recorded as %s.", name, strings.Join(parts, ", ")), involved, a.tags, nil, 0)
		}

		// Age going backwards: a class below the highest seen before.
		var top *Capture
		for _, c := range a.recs {
			r := ageRank(c.Age)
			if r == 0 || c.CapturedAt.IsZero() {
				continue
			}
			if top != nil && r < ageRank(top.Age) {
				ck.add(CheckAgeBackwards, fmt.Sprintf("%s is recorded %s (%s) after being recorded %s (%s).", name, c.Age, describe(c), top.Age, describe(top)),
					[]*Capture{top, c}, a.tags, nil, ck.occasionOf(c))
				break
			}
			if top == nil || r > ageRank(top.Age) {
				top = c
			}
		}

		// Likely duplicates: in-hand records on one occasion from two or
		// more devices.
		byOcc := map[int][]*Capture{}
		var occOrder []int
		for _, c := range a.recs {
			occ := ck.occasionOf(c)
			if !inHand(c.Event) || occ == 0 {
				continue
			}
			if byOcc[occ] == nil {
				occOrder = append(occOrder, occ)
			}
			byOcc[occ] = append(byOcc[occ], c)
		}
		for _, occ := range occOrder {
			rs := byOcc[occ]
			var devices []string
			for _, c := range rs {
				devices = appendNew(devices, c.Device)
			}
			if len(devices) < 2 {
				continue
			}
			parts := make([]string, len(rs))
			for i, c := range rs {
				parts[i] = describe(c)
			}
			ck.add(CheckLikelyDuplicate, fmt.Sprintf("%s has %d in-hand records on occasion %d from %d devices: %s.", name, len(rs), occ, len(devices), strings.Join(parts, "; ")),
				rs, a.tags, devices, occ)
		}
	}
}

func times(n int) string {
	if n == 1 {
		return "once"
	}
	if n == 2 {
		return "twice"
	}
	return fmt.Sprintf("%d times", n)
}

// mergeByTime merges two time-ordered record lists.
func mergeByTime(a, b []*Capture) []*Capture {
	out := make([]*Capture, 0, len(a)+len(b))
	out = append(out, a...)
	out = append(out, b...)
	sort.SliceStable(out, func(i, j int) bool {
		if !out[i].CapturedAt.Equal(out[j].CapturedAt) {
			return out[i].CapturedAt.Before(out[j].CapturedAt)
		}
		return out[i].ID < out[j].ID
	})
	return out
}

// StampTime reads the wall-clock part of a revision stamp: the first 12
// characters are the Unix time in milliseconds in lower-case hex, as the
// sync package writes its hybrid logical clock stamps (sync.Stamp.String;
// package capture cannot import sync, so the format is read here). ok is
// false for an empty or unreadable stamp.
func StampTime(stamp string) (t time.Time, ok bool) {
	if len(stamp) < 20 {
		return time.Time{}, false
	}
	var ms int64
	for i := 0; i < 12; i++ {
		c := stamp[i]
		var d byte
		switch {
		case c >= '0' && c <= '9':
			d = c - '0'
		case c >= 'a' && c <= 'f':
			d = c - 'a' + 10
		default:
			return time.Time{}, false
		}
		ms = ms<<4 | int64(d)
	}
	return time.UnixMilli(ms).UTC(), true
}

// perDevice runs the clock check.
func (ck *checker) perDevice(recs []*Capture) {
	type lagged struct {
		c   *Capture
		lag time.Duration // stamp minus captured_at
		// own: the revision was stamped by the capturing device itself
		// (or names no device), so a long lag says something about that
		// device rather than about a later edit elsewhere.
		own bool
	}
	byDevice := map[string][]lagged{}
	var order []string
	for _, c := range recs {
		if c.Device == "" || c.CapturedAt.IsZero() {
			continue
		}
		t, ok := StampTime(c.Revision.Stamp)
		if !ok {
			continue
		}
		if byDevice[c.Device] == nil {
			order = append(order, c.Device)
		}
		own := c.Revision.Device == "" || c.Revision.Device == c.Device
		byDevice[c.Device] = append(byDevice[c.Device], lagged{c, t.Sub(c.CapturedAt), own})
	}
	sort.Strings(order)
	for _, dev := range order {
		ls := byDevice[dev]
		var ahead, own []*Capture
		var most time.Duration
		minLag := time.Duration(1<<63 - 1)
		for _, l := range ls {
			if -l.lag > SkewAhead {
				ahead = append(ahead, l.c)
				most = max(most, -l.lag)
			}
			if l.own {
				own = append(own, l.c)
				minLag = min(minLag, l.lag)
			}
		}
		if len(ahead) > 0 {
			ck.add(CheckClockSkew, fmt.Sprintf("Device %s: %d of its %d stamped records have a capture time later than the moment the record was written, by up to %s. The device's clock (or the typed time) is probably ahead.",
				dev, len(ahead), len(ls), roundDur(most)), ahead, nil, []string{dev}, 0)
			continue
		}
		if len(own) >= SkewMinRecords && minLag > SkewBehind {
			ck.add(CheckClockSkew, fmt.Sprintf("Device %s: every one of the %d records it stamped itself was written at least %s after its capture time. Its clock may be behind, or the records were entered later from paper.",
				dev, len(own), roundDur(minLag)), own, nil, []string{dev}, 0)
		}
	}
}

func roundDur(d time.Duration) string {
	if d >= time.Hour {
		return d.Round(time.Minute).String()
	}
	return d.Round(time.Second).String()
}
