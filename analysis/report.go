package analysis

import (
	"errors"
	"fmt"
	"sort"

	"tagtally/capture"
	"tagtally/estimators"
	"tagtally/estimators/closed"
	"tagtally/estimators/demography"
	"tagtally/estimators/open"
	"tagtally/estimators/spatial"
)

// Report is everything tagtally estimates for one study: the single
// source of the numbers that the API, the coordinator's pages, the
// workbook export and the command line show. Each section is nil when it
// does not apply or could not be computed; Errors then says why, keyed by
// section name.
type Report struct {
	StudyID   string         `json:"study_id"`
	StudyName string         `json:"study_name"`
	Design    capture.Design `json:"design"`
	Animals   int            `json:"animals"`
	Captures  int            `json:"captures"`
	Occasions []int          `json:"occasions"`

	// Histories are the capture histories the estimates were computed
	// from (not sent as JSON: the animals list can be long).
	Histories *capture.HistorySet `json:"-"`

	Summary []capture.OccasionSummary `json:"summary"`
	MArray  *capture.MArray           `json:"m_array"`

	// Closed is the closed-population model table (closed designs).
	Closed *closed.Report `json:"closed,omitempty"`
	// JollySeber, CJS and GOF are the open-population results (open
	// designs).
	JollySeber *open.JollySeberResult `json:"jolly_seber,omitempty"`
	CJS        *open.ModelTable       `json:"cjs,omitempty"`
	GOF        *open.GOF              `json:"gof,omitempty"`
	// Robust is Pollock's robust design, ad hoc two-stage (robust designs).
	Robust *open.RobustResult `json:"robust,omitempty"`
	// Density uses the model-averaged closed N and the half-MMDM strip.
	Density *spatial.DensityResult `json:"density,omitempty"`
	// Dispersion is how the animals spread over the stations: distinct
	// animals first caught at each station, every station counted.
	Dispersion *spatial.DispersionResult `json:"dispersion,omitempty"`
	// NearestNeighbour is the Clark-Evans ratio of the GPS positions of
	// each animal's first capture, with Donnelly's edge correction, over
	// the stations' hull plus the density strip.
	NearestNeighbour *spatial.NearestNeighbour `json:"nearest_neighbour,omitempty"`

	SexRatio    *demography.SexRatioResult     `json:"sex_ratio,omitempty"`
	Ages        *demography.AgeStructureResult `json:"age_structure,omitempty"`
	Frequencies *demography.FrequencyTable     `json:"capture_frequencies,omitempty"`
	Mass        *demography.MassSummary        `json:"mass,omitempty"`

	// Notes are the history builder's and adapter's remarks (covariates
	// left out, records outside occasions).
	Notes []string `json:"notes,omitempty"`
	// Errors says why a section is missing, e.g. "closed": "N is not
	// identifiable: no recaptures".
	Errors map[string]string `json:"errors,omitempty"`
}

// ErrStudy wraps failures to read the study itself.
var ErrStudy = errors.New("analysis")

// ForStudy reads the study and its records from the store and computes
// the report.
func ForStudy(s *capture.Store, studyID string) (*Report, error) {
	st, err := s.GetStudy(studyID)
	if err != nil {
		return nil, fmt.Errorf("%w: %w", ErrStudy, err)
	}
	caps, err := s.Captures(studyID, false)
	if err != nil {
		return nil, fmt.Errorf("%w: %w", ErrStudy, err)
	}
	return FromCaptures(st, caps)
}

// FromCaptures computes the report for a study's live records.
func FromCaptures(st *capture.Study, caps []capture.Capture) (*Report, error) {
	hs, err := capture.BuildHistories(st, caps, &capture.HistoryOptions{GroupBy: "sex"})
	if err != nil {
		return nil, fmt.Errorf("%w: capture histories: %w", ErrStudy, err)
	}
	r := &Report{
		StudyID: st.ID, StudyName: st.Name, Design: st.Design,
		Animals: len(hs.Animals), Occasions: hs.Occasions, Histories: hs,
		Summary: hs.Summary(), MArray: hs.MArray(),
		Errors: map[string]string{},
	}
	for _, n := range hs.Notes {
		r.Notes = append(r.Notes, n.Message)
	}
	for i := range hs.Animals {
		r.Captures += hs.Animals[i].Captures
	}
	r.demography(st, caps, hs)
	if len(hs.Animals) == 0 {
		r.Errors["estimates"] = "no animals have been caught on the study's occasions yet"
		return r, nil
	}
	h, notes, err := FromHistorySet(hs)
	r.Notes = append(r.Notes, notes...)
	if err != nil {
		r.Errors["estimates"] = err.Error()
		return r, nil
	}
	switch st.Design {
	case capture.DesignOpen:
		r.openModels(h)
	case capture.DesignRobust:
		r.robust(h, hs)
	default:
		r.closedModels(h)
		r.density(st, caps, hs)
	}
	r.spread(st, caps, hs)
	return r, nil
}

// spread fills Dispersion and NearestNeighbour. Each animal counts once,
// at its first capture in hand, so the counts are of animals, not of
// repeated captures of the same ones.
func (r *Report) spread(st *capture.Study, caps []capture.Capture, hs *capture.HistorySet) {
	if len(st.Stations) < 2 || len(hs.Animals) == 0 {
		return
	}
	first := firstCaptures(caps, hs)
	index := map[string]int{}
	for i, s := range st.Stations {
		index[s.ID] = i
	}
	counts := make([]int, len(st.Stations))
	for _, c := range first {
		if i, ok := index[c.StationID]; ok {
			counts[i]++
		}
	}
	if d, err := spatial.Dispersion(counts); err != nil {
		r.Errors["dispersion"] = err.Error()
	} else {
		r.Dispersion = d
	}
	r.clarkEvans(st, first)
}

// firstCaptures returns each animal's first capture in hand.
func firstCaptures(caps []capture.Capture, hs *capture.HistorySet) []capture.Capture {
	animalOf := map[string]int{}
	for i := range hs.Animals {
		for _, t := range hs.Animals[i].Tags {
			animalOf[t] = i
		}
	}
	first := map[int]capture.Capture{}
	for _, c := range caps {
		a, ok := animalOf[c.TagID]
		if !ok || c.Revision.Deleted || c.Event == capture.EventDeadRecovery || c.Event == capture.EventResight {
			continue
		}
		if f, seen := first[a]; !seen || c.CapturedAt.Before(f.CapturedAt) {
			first[a] = c
		}
	}
	out := make([]capture.Capture, 0, len(first))
	for i := range hs.Animals {
		if c, ok := first[i]; ok {
			out = append(out, c)
		}
	}
	return out
}

// clarkEvans needs GPS positions and stations with lat/lon, so both share
// one local projection; at least 7 positions (Donnelly's correction was
// worked out for patterns of about that size or more).
func (r *Report) clarkEvans(st *capture.Study, first []capture.Capture) {
	ll := make([]spatial.LatLon, 0, len(st.Stations))
	for _, s := range st.Stations {
		if s.Lat == nil || s.Lon == nil {
			return
		}
		ll = append(ll, spatial.LatLon{Lat: *s.Lat, Lon: *s.Lon})
	}
	stations, proj, err := spatial.ProjectStations(ll)
	if err != nil {
		return
	}
	var pts []spatial.Point
	for _, c := range first {
		if c.Lat != nil && c.Lon != nil {
			pts = append(pts, proj.Project(spatial.LatLon{Lat: *c.Lat, Lon: *c.Lon}))
		}
	}
	if len(pts) < 7 {
		return
	}
	w := 0.0
	if r.Density != nil {
		w = r.Density.StripWidth.Estimate
	}
	region, err := spatial.BufferedHullRegion(stations, w)
	if err == nil {
		r.NearestNeighbour, err = spatial.ClarkEvans(pts, region, true)
	}
	if err != nil {
		r.Errors["nearest_neighbour"] = err.Error()
	}
}

func (r *Report) closedModels(h *estimators.Histories) {
	rep, err := closed.Table(h, closed.TableOptions{})
	if err != nil {
		r.Errors["closed"] = err.Error()
		return
	}
	r.Closed = rep
}

func (r *Report) openModels(h *estimators.Histories) {
	m, sum, err := open.FromHistories(h)
	if err != nil {
		r.Errors["open"] = err.Error()
		return
	}
	if js, err := open.JollySeber(sum); err != nil {
		r.Errors["jolly_seber"] = err.Error()
	} else {
		r.JollySeber = js
	}
	cHat := 1.0
	if gof, err := open.GoodnessOfFit(h); err != nil {
		r.Errors["gof"] = err.Error()
	} else {
		r.GOF = gof
		cHat = gof.SelectionCHat()
	}
	ms, groups := []open.MArray{m}, []string(nil)
	if h.Groups != nil {
		if g, gm, err := open.GroupMArrays(h); err == nil && len(g) > 1 {
			ms, groups = gm, g
		}
	}
	tab, err := open.CJSTable(ms, groups, nil, cHat)
	if err != nil {
		r.Errors["cjs"] = err.Error()
		return
	}
	r.CJS = tab
}

func (r *Report) robust(h *estimators.Histories, hs *capture.HistorySet) {
	if len(hs.Primary) != len(hs.Occasions) {
		r.Errors["robust"] = "the study's occasions do not name their primary periods"
		return
	}
	res, err := open.RobustDesignAdHoc(h, hs.Primary)
	if err != nil {
		r.Errors["robust"] = err.Error()
		return
	}
	r.Robust = res
}

// density divides the closed model-averaged N by the effective trapping
// area, the stations' hull plus a half-MMDM strip (Wilson & Anderson
// 1985). Stations with grid coordinates are used as they are; otherwise
// WGS84 positions are projected locally.
func (r *Report) density(st *capture.Study, caps []capture.Capture, hs *capture.HistorySet) {
	if r.Closed == nil || r.Closed.AveragedN == nil {
		return
	}
	pos, err := stationPositions(st)
	if err != nil {
		r.Errors["density"] = err.Error()
		return
	}
	if len(pos) == 0 {
		return
	}
	animalOf := map[string]int{}
	for i := range hs.Animals {
		for _, t := range hs.Animals[i].Tags {
			animalOf[t] = i
		}
	}
	animals := make([][]spatial.Point, len(hs.Animals))
	for _, c := range caps {
		i, ok := animalOf[c.TagID]
		p, known := pos[c.StationID]
		if !ok || !known || c.Event == capture.EventDeadRecovery || c.Event == capture.EventResight {
			continue
		}
		animals[i] = append(animals[i], p)
	}
	stations := make([]spatial.Point, 0, len(pos))
	ids := make([]string, 0, len(pos))
	for id := range pos {
		ids = append(ids, id)
	}
	sort.Strings(ids)
	for _, id := range ids {
		stations = append(stations, pos[id])
	}
	d, err := spatial.Density(spatial.DensityInput{Stations: stations, Animals: animals, N: *r.Closed.AveragedN, Strip: spatial.HalfMMDM})
	if err != nil {
		r.Errors["density"] = err.Error()
		return
	}
	r.Density = d
}

// stationPositions gives each station a position in metres: grid x,y when
// every station has them, else a local projection of lat/lon when every
// station has those; otherwise none (density is then not computed).
func stationPositions(st *capture.Study) (map[string]spatial.Point, error) {
	out := map[string]spatial.Point{}
	grid, geo := true, true
	for _, s := range st.Stations {
		grid = grid && s.GridX != nil && s.GridY != nil
		geo = geo && s.Lat != nil && s.Lon != nil
	}
	switch {
	case len(st.Stations) == 0:
		return out, nil
	case grid:
		for _, s := range st.Stations {
			out[s.ID] = spatial.Point{X: *s.GridX, Y: *s.GridY}
		}
	case geo:
		ll := make([]spatial.LatLon, len(st.Stations))
		for i, s := range st.Stations {
			ll[i] = spatial.LatLon{Lat: *s.Lat, Lon: *s.Lon}
		}
		pts, _, err := spatial.ProjectStations(ll)
		if err != nil {
			return nil, err
		}
		for i, s := range st.Stations {
			out[s.ID] = pts[i]
		}
	}
	return out, nil
}

// demography fills the sex ratio (latest known sex per animal), age
// structure by occasion, capture frequencies and mass by sex and age.
func (r *Report) demography(st *capture.Study, caps []capture.Capture, hs *capture.HistorySet) {
	var males, females, unknown int
	for i := range hs.Animals {
		switch hs.Animals[i].Sex {
		case capture.SexMale:
			males++
		case capture.SexFemale:
			females++
		default:
			unknown++
		}
	}
	if sr, err := demography.SexRatio(males, females, unknown); err == nil {
		r.SexRatio = sr
	} else if len(hs.Animals) > 0 {
		r.Errors["sex_ratio"] = err.Error()
	}
	animalOf := map[string]string{}
	for i := range hs.Animals {
		for _, t := range hs.Animals[i].Tags {
			animalOf[t] = hs.Animals[i].ID
		}
	}
	var ages []demography.AgeRecord
	var masses []demography.MassRecord
	seen := map[[2]string]bool{}
	for _, c := range caps {
		a, ok := animalOf[c.TagID]
		if !ok || c.Occasion == 0 || c.Event == capture.EventDeadRecovery {
			continue
		}
		key := [2]string{a, fmt.Sprint(c.Occasion)}
		if c.Age != "" && !seen[key] {
			seen[key] = true
			ages = append(ages, demography.AgeRecord{Animal: a, Occasion: c.Occasion, Class: string(c.Age)})
		}
		if c.MassG != nil {
			sex, age := string(c.Sex), string(c.Age)
			if sex == "" {
				sex = string(capture.SexUnknown)
			}
			if age == "" {
				age = string(capture.AgeUnknown)
			}
			masses = append(masses, demography.MassRecord{Sex: sex, Age: age, Mass: *c.MassG})
		}
	}
	if len(ages) > 0 {
		classes := []string{string(capture.AgeJuvenile), string(capture.AgeSubadult), string(capture.AgeAdult), string(capture.AgeUnknown)}
		if a, err := demography.AgeStructure(ages, classes); err == nil {
			r.Ages = a
		} else {
			r.Errors["age_structure"] = err.Error()
		}
	}
	if len(masses) > 0 {
		if m, err := demography.MassBySexAndAge(masses); err == nil {
			r.Mass = m
		} else {
			r.Errors["mass"] = err.Error()
		}
	}
	if len(hs.Animals) > 0 {
		h := &estimators.Histories{Caught: hs.Caught()}
		if f, err := demography.CaptureFrequencies(h); err == nil {
			r.Frequencies = f
		} else {
			r.Errors["capture_frequencies"] = err.Error()
		}
	}
}
