package capture

import (
	"fmt"
	"sort"
	"time"
)

// HistoryOptions choose how records become capture histories. The zero
// value (or nil) counts captures in hand only and sets no group.
type HistoryOptions struct {
	// IncludeResights counts a resight (tag read without capture) as a
	// capture on its occasion. Off by default: many models assume every
	// detection is a capture in hand.
	IncludeResights bool
	// GroupBy fills AnimalHistory.Group: "" (none), "sex", "age" or
	// "species".
	GroupBy string
}

// HistorySet is the individual x occasion capture matrix of a study, with
// each animal's covariates: what closed- and open-population estimators
// take. Column j of every Caught row is occasion Occasions[j].
type HistorySet struct {
	StudyID string `json:"study_id,omitempty"`
	// Occasions are the occasion indices, in column (time) order.
	Occasions []int `json:"occasions"`
	// Primary is the primary period of each column in a robust design,
	// nil otherwise.
	Primary []int           `json:"primary,omitempty"`
	Animals []AnimalHistory `json:"animals"`
	// Notes are data problems met while building: records left out (no
	// occasion, deleted tag chains with no capture), conflicting sexes, a
	// loss on capture followed by later captures. The matrix is built
	// regardless; the coordinator decides what to fix.
	Notes Findings `json:"notes,omitempty"`
}

// AnimalHistory is one animal: one tag chain, one row of the matrix.
type AnimalHistory struct {
	// ID is the animal's first tag (the oldest tag of its chain).
	ID string `json:"id"`
	// Tags is the tag chain in the order the tags were first recorded:
	// a retag from A to B, then from B to C, gives [A B C].
	Tags []string `json:"tags"`
	// Caught[j] is true when the animal was caught on occasion
	// Occasions[j] (new mark, recapture or retag; resight when counted).
	Caught []bool `json:"caught"`
	// Removed: lost on capture (fate died or removed) at its last capture,
	// so it was not released then.
	Removed bool `json:"removed,omitempty"`
	// Recovered: found dead (a dead recovery record). Dead recoveries are
	// not captures and do not set Removed.
	Recovered bool     `json:"recovered,omitempty"`
	Sex       Sex      `json:"sex,omitempty"`     // latest known (female/male) sex
	Age       AgeClass `json:"age,omitempty"`     // latest known age class
	Species   string   `json:"species,omitempty"` // latest recorded species
	// MassG is the mean of the masses recorded in hand; nil if none.
	MassG *float64 `json:"mass_g,omitempty"`
	// Group is the label chosen by HistoryOptions.GroupBy ("" if none).
	Group string `json:"group,omitempty"`
	// Covariates are named individual covariates: from records, the mean
	// of each free measurement by name; from a history CSV, its extra
	// numeric columns.
	Covariates map[string]float64 `json:"covariates,omitempty"`
	// Captures counts the records that set Caught (an animal caught twice
	// on one occasion counts 2 here and once in Caught).
	Captures int `json:"captures"`
	// FirstSeen and LastSeen span all the animal's live records (dead
	// recoveries and resights included); zero for histories read from CSV.
	FirstSeen time.Time `json:"first_seen,omitempty"`
	LastSeen  time.Time `json:"last_seen,omitempty"`
}

// String returns the history as a 0/1 string, one character per occasion.
func (a *AnimalHistory) String() string {
	b := make([]byte, len(a.Caught))
	for j, c := range a.Caught {
		b[j] = '0'
		if c {
			b[j] = '1'
		}
	}
	return string(b)
}

// Note codes of HistorySet.Notes (besides FindingNoOccasion).
const (
	// NoteNotCaught: a tag chain has records (resights not counted, dead
	// recoveries) but no capture, so it has no row.
	NoteNotCaught = "not_caught"
	// NoteSexConflict: the animal was recorded as both female and male;
	// the latest is kept.
	NoteSexConflict = "sex_conflict"
	// NoteCaughtAfterLoss: a loss on capture is recorded before the
	// animal's last capture; it is not treated as removed.
	NoteCaughtAfterLoss = "caught_after_loss"
	// NoteOtherStudy: a record of another study was passed in and skipped.
	NoteOtherStudy = "other_study"
	// NoteBranchingChain: one old tag was retagged to two different new
	// tags; the records are kept as one animal.
	NoteBranchingChain = "branching_chain"
)

// Histories builds the capture histories of a study from its stored,
// non-deleted captures (see BuildHistories). opts may be nil.
func (s *Store) Histories(studyID string, opts *HistoryOptions) (*HistorySet, error) {
	var st *Study
	var caps []Capture
	err := s.View(func(tx *Tx) error {
		var err error
		if st, err = tx.GetStudy(studyID); err != nil {
			return err
		}
		return tx.ForEachCapture(studyID, func(c *Capture) error {
			if !c.Revision.Deleted {
				caps = append(caps, *c)
			}
			return nil
		})
	})
	if err != nil {
		return nil, fmt.Errorf("capture histories: %w", err)
	}
	return BuildHistories(st, caps, opts)
}

// BuildHistories turns capture records into one history per animal.
//
//   - Records are taken in time order (captured_at, then ID). Deleted
//     records are ignored.
//   - An animal is a tag chain: a retag record joins its old and new tag,
//     so an animal retagged A->B->C has one row, ID A, Tags [A B C].
//   - A record's occasion is its hand-set occasion, else the occasion whose
//     window contains captured_at under the study's current windows; a
//     record in no occasion is left out (noted).
//   - New marks, recaptures and retags are captures; resights count only
//     with opts.IncludeResights; dead recoveries never count (they set
//     Recovered).
//   - Removed (loss on capture) is set when a capture on the animal's last
//     capture occasion has fate died or removed.
//   - Covariates: latest known sex, age class and species; mean mass of
//     in-hand records; mean of each free measurement.
//
// Animals are ordered by their first record. An error means the study is
// invalid or opts.GroupBy is unknown; data problems become Notes.
func BuildHistories(st *Study, caps []Capture, opts *HistoryOptions) (*HistorySet, error) {
	if opts == nil {
		opts = &HistoryOptions{}
	}
	switch opts.GroupBy {
	case "", "sex", "age", "species":
	default:
		return nil, fmt.Errorf("capture histories: %w", invalid("group_by", "group by %q: choose sex, age or species", opts.GroupBy))
	}
	if err := st.Validate(); err != nil {
		return nil, fmt.Errorf("capture histories: study %q: %w", st.ID, err)
	}
	k := len(st.Occasions)
	hs := &HistorySet{StudyID: st.ID, Occasions: make([]int, k)}
	col := make(map[int]int, k)
	occs := append([]Occasion(nil), st.Occasions...)
	sort.Slice(occs, func(a, b int) bool { return occs[a].Index < occs[b].Index })
	for j, o := range occs {
		hs.Occasions[j] = o.Index
		col[o.Index] = j
	}
	if st.Design == DesignRobust {
		hs.Primary = make([]int, k)
		for j, o := range occs {
			hs.Primary[j] = o.Primary
		}
	}

	// Live records of this study, in time order.
	recs := make([]*Capture, 0, len(caps))
	for i := range caps {
		c := &caps[i]
		if c.Revision.Deleted {
			continue
		}
		if c.StudyID != st.ID {
			hs.Notes = append(hs.Notes, Finding{Code: NoteOtherStudy, Field: "study_id",
				Message: fmt.Sprintf("record %s belongs to study %q and was skipped", c.ID, c.StudyID)})
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

	// Tag chains by union-find over tags, numbered in order of first
	// appearance.
	tagNo := make(map[string]int, len(recs))
	var tags []string
	var parent []int
	number := func(tag string) int {
		if n, ok := tagNo[tag]; ok {
			return n
		}
		n := len(tags)
		tagNo[tag] = n
		tags = append(tags, tag)
		parent = append(parent, n)
		return n
	}
	var find func(int) int
	find = func(x int) int {
		for parent[x] != x {
			parent[x] = parent[parent[x]]
			x = parent[x]
		}
		return x
	}
	retaggedTo := make(map[string]string)
	for _, c := range recs {
		if c.Event == EventRetag && c.OldTagID != "" {
			a, b := number(c.OldTagID), number(c.TagID)
			if prev, ok := retaggedTo[c.OldTagID]; ok && prev != c.TagID {
				hs.Notes = append(hs.Notes, Finding{Code: NoteBranchingChain, Field: "old_tag_id",
					Message: fmt.Sprintf("tag %q was retagged to both %q and %q; treated as one animal", c.OldTagID, prev, c.TagID)})
			}
			retaggedTo[c.OldTagID] = c.TagID
			// Keep the smaller number (the older tag) as the root.
			ra, rb := find(a), find(b)
			if ra < rb {
				parent[rb] = ra
			} else if rb < ra {
				parent[ra] = rb
			}
		} else {
			number(c.TagID)
		}
	}

	type acc struct {
		h                  AnimalHistory
		any                bool
		lastCol            int
		lossCol            int // column of the latest counted loss, -1 if none
		sawF, sawM         bool
		massSum            float64
		massN              int
		measSum            map[string]float64
		measN              map[string]int
		lossThenCaughtNote bool
	}
	animals := make(map[int]*acc)
	var order []int
	for _, c := range recs {
		root := find(tagNo[c.TagID])
		a := animals[root]
		if a == nil {
			a = &acc{lastCol: -1, lossCol: -1}
			a.h.Caught = make([]bool, k)
			animals[root] = a
			order = append(order, root)
		}
		// Chain tags in first-appearance order.
		addTag := func(t string) {
			for _, have := range a.h.Tags {
				if have == t {
					return
				}
			}
			a.h.Tags = append(a.h.Tags, t)
		}
		if c.Event == EventRetag && c.OldTagID != "" {
			addTag(c.OldTagID)
		}
		addTag(c.TagID)

		occ := c.Occasion
		if !c.OccasionSetByHand {
			occ = st.OccasionAt(c.CapturedAt)
		}
		j, inStudy := col[occ]
		if !inStudy {
			hs.Notes = append(hs.Notes, Finding{Code: FindingNoOccasion, Field: "captured_at",
				Message: fmt.Sprintf("record %s (tag %s, %s) falls in no occasion and was left out", c.ID, c.TagID, c.CapturedAt.Format(time.RFC3339))})
			continue
		}
		if a.h.FirstSeen.IsZero() {
			a.h.FirstSeen = c.CapturedAt
		}
		a.h.LastSeen = c.CapturedAt
		switch c.Sex {
		case SexFemale:
			a.sawF = true
			a.h.Sex = c.Sex
		case SexMale:
			a.sawM = true
			a.h.Sex = c.Sex
		}
		if c.Age != "" && c.Age != AgeUnknown {
			a.h.Age = c.Age
		}
		if c.Species != "" {
			a.h.Species = c.Species
		}
		if c.Event == EventDeadRecovery {
			a.h.Recovered = true
			continue
		}
		if c.Event == EventResight && !opts.IncludeResights {
			continue
		}
		if c.Event != EventResight {
			if c.MassG != nil {
				a.massSum += *c.MassG
				a.massN++
			}
			for _, m := range c.Measurements {
				if a.measSum == nil {
					a.measSum, a.measN = map[string]float64{}, map[string]int{}
				}
				a.measSum[m.Name] += m.Value
				a.measN[m.Name]++
			}
		}
		a.any = true
		a.h.Caught[j] = true
		a.h.Captures++
		if j > a.lastCol {
			a.lastCol = j
		}
		if c.Fate == FateDied || c.Fate == FateRemoved {
			if j > a.lossCol {
				a.lossCol = j
			}
		}
	}

	hs.Animals = make([]AnimalHistory, 0, len(order))
	for _, root := range order {
		a := animals[root]
		h := a.h
		if len(h.Tags) == 0 {
			h.Tags = []string{tags[root]}
		}
		h.ID = h.Tags[0]
		if !a.any {
			hs.Notes = append(hs.Notes, Finding{Code: NoteNotCaught, Field: "tag_id",
				Message: fmt.Sprintf("tag %s has records but no capture on an occasion; it has no history row", h.ID)})
			continue
		}
		if a.sawF && a.sawM {
			hs.Notes = append(hs.Notes, Finding{Code: NoteSexConflict, Field: "sex",
				Message: fmt.Sprintf("animal %s was recorded as both female and male; the latest (%s) is used", h.ID, h.Sex)})
		}
		if a.lossCol >= 0 {
			if a.lossCol == a.lastCol {
				h.Removed = true
			} else {
				hs.Notes = append(hs.Notes, Finding{Code: NoteCaughtAfterLoss, Field: "fate",
					Message: fmt.Sprintf("animal %s is recorded dead or removed on occasion %d but caught again later; not treated as a loss on capture", h.ID, hs.Occasions[a.lossCol])})
			}
		}
		if a.massN > 0 {
			m := a.massSum / float64(a.massN)
			h.MassG = &m
		}
		if len(a.measSum) > 0 {
			h.Covariates = make(map[string]float64, len(a.measSum))
			for name, sum := range a.measSum {
				h.Covariates[name] = sum / float64(a.measN[name])
			}
		}
		switch opts.GroupBy {
		case "sex":
			h.Group = string(h.Sex)
		case "age":
			h.Group = string(h.Age)
		case "species":
			h.Group = h.Species
		}
		hs.Animals = append(hs.Animals, h)
	}
	return hs, nil
}

// Caught returns the matrix as rows of booleans (shared with the set, not
// copied).
func (h *HistorySet) Caught() [][]bool {
	out := make([][]bool, len(h.Animals))
	for i := range h.Animals {
		out[i] = h.Animals[i].Caught
	}
	return out
}

// RemovedFlags returns each animal's loss-on-capture flag.
func (h *HistorySet) RemovedFlags() []bool {
	out := make([]bool, len(h.Animals))
	for i := range h.Animals {
		out[i] = h.Animals[i].Removed
	}
	return out
}

// lastCaught returns the column of the animal's last capture, -1 if none.
func lastCaught(row []bool) int {
	for j := len(row) - 1; j >= 0; j-- {
		if row[j] {
			return j
		}
	}
	return -1
}

// OccasionSummary is one row of the per-occasion summary table.
type OccasionSummary struct {
	Occasion int `json:"occasion"`
	// Caught is n_i, the animals caught on the occasion.
	Caught int `json:"caught"`
	// Marked is m_i, those of them caught on an earlier occasion.
	Marked int `json:"marked"`
	// New is u_i = n_i - m_i, those caught for the first time.
	New int `json:"new"`
	// Losses is l_i, those not released (loss on capture).
	Losses int `json:"losses"`
	// Released is R_i = n_i - l_i.
	Released int `json:"released"`
	// MarkedAtLarge is M_i, the marked animals in the population just
	// before the occasion: the sum over earlier occasions of u - l.
	MarkedAtLarge int `json:"marked_at_large"`
}

// Summary returns the per-occasion table (n_i, m_i, u_i, l_i, R_i, M_i)
// used by the Schnabel and Jolly-Seber estimators (Seber 1982, ch. 5).
// A loss is counted on the animal's last capture occasion when Removed is
// set. Rows whose length differs from Occasions are ignored.
func (h *HistorySet) Summary() []OccasionSummary {
	k := len(h.Occasions)
	out := make([]OccasionSummary, k)
	for j := range out {
		out[j].Occasion = h.Occasions[j]
	}
	for i := range h.Animals {
		row := h.Animals[i].Caught
		if len(row) != k {
			continue
		}
		seen := false
		for j, c := range row {
			if !c {
				continue
			}
			out[j].Caught++
			if seen {
				out[j].Marked++
			}
			seen = true
		}
		if h.Animals[i].Removed {
			if j := lastCaught(row); j >= 0 {
				out[j].Losses++
			}
		}
	}
	atLarge := 0
	for j := range out {
		out[j].New = out[j].Caught - out[j].Marked
		out[j].Released = out[j].Caught - out[j].Losses
		out[j].MarkedAtLarge = atLarge
		atLarge += out[j].New - out[j].Losses
	}
	return out
}

// MArray is the m-array of an open population study (Burnham et al. 1987,
// Part 1; Lebreton et al. 1992): for each release occasion i, the R_i
// animals released and, for each later occasion j, m_ij, how many of them
// were next caught on occasion j. Rows cover release occasions 1..k-1
// (a release on the last occasion can never be followed up).
type MArray struct {
	// Occasions are all k occasion indices; row i is release occasion
	// Occasions[i], column j of Next is Occasions[j].
	Occasions []int `json:"occasions"`
	// Released is R_i for i = 0..k-2.
	Released []int `json:"released"`
	// Next[i][j] is m_ij, zero for j <= i. Rows have length k.
	Next [][]int `json:"next"`
	// Recaptured is r_i, the sum of row i: released at i and caught again.
	Recaptured []int `json:"recaptured"`
	// NeverRecaptured is R_i - r_i.
	NeverRecaptured []int `json:"never_recaptured"`
}

// MArray builds the m-array. Each capture occasion of an animal is a
// release unless the animal was removed on it (its last); each release
// contributes to m_ij for the animal's next capture occasion j, or to
// NeverRecaptured. With fewer than two occasions the array has no rows.
func (h *HistorySet) MArray() *MArray {
	k := len(h.Occasions)
	rows := k - 1
	if rows < 0 {
		rows = 0
	}
	m := &MArray{
		Occasions:       append([]int(nil), h.Occasions...),
		Released:        make([]int, rows),
		Next:            make([][]int, rows),
		Recaptured:      make([]int, rows),
		NeverRecaptured: make([]int, rows),
	}
	cells := make([]int, rows*k)
	for i := range m.Next {
		m.Next[i] = cells[i*k : (i+1)*k : (i+1)*k]
	}
	for a := range h.Animals {
		row := h.Animals[a].Caught
		if len(row) != k {
			continue
		}
		prev := -1
		for j, c := range row {
			if !c {
				continue
			}
			if prev >= 0 {
				m.Next[prev][j]++
				m.Recaptured[prev]++
			}
			prev = j
		}
		// prev is now the last capture: a release unless removed there,
		// never followed by a recapture.
		for j, c := range row {
			if c && j < rows && !(j == prev && h.Animals[a].Removed) {
				m.Released[j]++
			}
		}
	}
	for i := range m.Released {
		m.NeverRecaptured[i] = m.Released[i] - m.Recaptured[i]
	}
	return m
}

// ColumnTotals returns m_.j, the number of marked animals caught on each
// occasion j (the column sums of Next); entry 0 is always 0.
func (m *MArray) ColumnTotals() []int {
	out := make([]int, len(m.Occasions))
	for _, row := range m.Next {
		for j, v := range row {
			out[j] += v
		}
	}
	return out
}
