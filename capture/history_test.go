package capture_test

import (
	"encoding/csv"
	"math/rand/v2"
	"os"
	"reflect"
	"strconv"
	"testing"
	"time"

	"tagtally/capture"
	"tagtally/capture/storetest"
)

// handExample is a small invented data set whose histories, summary and
// m-array were worked out by hand (common practice: the definitions in
// Seber 1982, ch. 5, and Burnham et al. 1987, Part 1), five occasions of
// storetest.Study:
//
//	animal   tags                       history  notes
//	BF-0001  BF-0001                    11010    masses 20, 22, 24 g; juvenile then adult
//	BF-0002  BF-0002>BF-0003>BF-0004    10111    retagged on occasions 3 and 5
//	BF-0009  BF-0009                    10000    its recapture on 2 is deleted
//	BF-0005  BF-0005                    01100    died in hand on 3: loss on capture
//	BF-0006  BF-0006                    01000    resighted on 3, found dead on 5
//	BF-0011  BF-0011                    00100    caught in occasion 2's window, occasion 3 set by hand
//	BF-0007  BF-0007                    00101    caught twice on 3
//	BF-0010  BF-0010                    00001    one record between windows (left out)
//	BF-0008  BF-0008                    00010    removed on 4: loss on capture
func handExample() []capture.Capture {
	var out []capture.Capture
	add := func(tag string, ev capture.Event, occ, minute int, edit func(*capture.Capture)) {
		c := newCapture(tag, ev, occ)
		c.CapturedAt = at(occ, minute)
		c.MassG = nil
		c.Sex, c.Age = "", ""
		if edit != nil {
			edit(c)
		}
		out = append(out, *c)
	}
	mass := func(g float64) func(*capture.Capture) { return func(c *capture.Capture) { c.MassG = fp(g) } }
	add("BF-0001", capture.EventNewMark, 1, 1, func(c *capture.Capture) { c.MassG = fp(20); c.Age = capture.AgeJuvenile; c.Sex = capture.SexMale })
	add("BF-0002", capture.EventNewMark, 1, 2, func(c *capture.Capture) { c.Sex = capture.SexFemale })
	add("BF-0009", capture.EventNewMark, 1, 9, nil)
	add("BF-0001", capture.EventRecapture, 2, 1, mass(22))
	add("BF-0009", capture.EventRecapture, 2, 9, func(c *capture.Capture) { c.Revision.Deleted = true })
	add("BF-0005", capture.EventNewMark, 2, 5, nil)
	add("BF-0006", capture.EventNewMark, 2, 6, nil)
	add("BF-0011", capture.EventNewMark, 2, 11, func(c *capture.Capture) { c.Occasion = 3; c.OccasionSetByHand = true })
	add("BF-0003", capture.EventRetag, 3, 2, func(c *capture.Capture) { c.OldTagID = "BF-0002"; c.Age = capture.AgeAdult })
	add("BF-0005", capture.EventRecapture, 3, 5, func(c *capture.Capture) { c.Fate = capture.FateDied })
	add("BF-0006", capture.EventResight, 3, 6, func(c *capture.Capture) { c.StationID = "" })
	add("BF-0007", capture.EventNewMark, 3, 7, nil)
	add("BF-0007", capture.EventRecapture, 3, 47, nil)
	add("BF-0010", capture.EventNewMark, 3, 0, func(c *capture.Capture) {
		c.CapturedAt = time.Date(2025, 6, 5, 12, 0, 0, 0, time.UTC) // between windows 3 and 4
	})
	add("BF-0001", capture.EventRecapture, 4, 1, func(c *capture.Capture) { c.MassG = fp(24); c.Age = capture.AgeAdult })
	add("BF-0003", capture.EventRecapture, 4, 2, nil)
	add("BF-0008", capture.EventNewMark, 4, 8, func(c *capture.Capture) { c.Fate = capture.FateRemoved })
	add("BF-0004", capture.EventRetag, 5, 2, func(c *capture.Capture) { c.OldTagID = "BF-0003"; c.Age = capture.AgeUnknown })
	add("BF-0006", capture.EventDeadRecovery, 5, 6, func(c *capture.Capture) { c.Fate = capture.FateDied })
	add("BF-0007", capture.EventRecapture, 5, 7, nil)
	add("BF-0010", capture.EventNewMark, 5, 10, nil)
	for i := range out {
		out[i].ID = uuidFor(i)
	}
	return out
}

func uuidFor(i int) string {
	return "0190b8a0-0000-7000-8000-" + leftPad(strconv.Itoa(i+1), 12)
}

func leftPad(s string, n int) string {
	for len(s) < n {
		s = "0" + s
	}
	return s
}

func histByID(h *capture.HistorySet) map[string]string {
	out := map[string]string{}
	for _, a := range h.Animals {
		out[a.ID] = a.String()
	}
	return out
}

func TestBuildHistoriesHandExample(t *testing.T) {
	caps := handExample()
	// Shuffle: the result must not depend on record order.
	r := rand.New(rand.NewPCG(1, 2))
	r.Shuffle(len(caps), func(i, j int) { caps[i], caps[j] = caps[j], caps[i] })
	h, err := capture.BuildHistories(storetest.Study(), caps, nil)
	if err != nil {
		t.Fatal(err)
	}
	want := map[string]string{ // hand-worked, see handExample
		"BF-0001": "11010", "BF-0002": "10111", "BF-0009": "10000",
		"BF-0005": "01100", "BF-0006": "01000", "BF-0011": "00100",
		"BF-0007": "00101", "BF-0010": "00001", "BF-0008": "00010",
	}
	if got := histByID(h); !reflect.DeepEqual(got, want) {
		t.Errorf("histories:\n got %v\nwant %v", got, want)
	}
	if !reflect.DeepEqual(h.Occasions, []int{1, 2, 3, 4, 5}) {
		t.Errorf("occasions = %v", h.Occasions)
	}
	var order []string
	for _, a := range h.Animals {
		order = append(order, a.ID)
	}
	// By first record in time; BF-0010's first record (between windows 3
	// and 4) places it before BF-0008.
	wantOrder := []string{"BF-0001", "BF-0002", "BF-0009", "BF-0005", "BF-0006", "BF-0011", "BF-0007", "BF-0010", "BF-0008"}
	if !reflect.DeepEqual(order, wantOrder) {
		t.Errorf("animal order %v, want %v", order, wantOrder)
	}
	get := func(id string) capture.AnimalHistory {
		for _, a := range h.Animals {
			if a.ID == id {
				return a
			}
		}
		t.Fatalf("no animal %s", id)
		return capture.AnimalHistory{}
	}
	if a := get("BF-0002"); !reflect.DeepEqual(a.Tags, []string{"BF-0002", "BF-0003", "BF-0004"}) || a.Sex != capture.SexFemale || a.Captures != 4 {
		t.Errorf("retag chain: %+v", a)
	}
	if a := get("BF-0001"); a.MassG == nil || *a.MassG != 22 || a.Age != capture.AgeAdult || a.Sex != capture.SexMale {
		t.Errorf("BF-0001 covariates: mass %v (want mean 22), age %q (want adult), sex %q", a.MassG, a.Age, a.Sex)
	}
	if a := get("BF-0002"); a.Age != capture.AgeAdult {
		t.Errorf("BF-0002: an 'unknown' age on a later record replaced the known one: %q", a.Age)
	}
	for id, removed := range map[string]bool{"BF-0005": true, "BF-0008": true, "BF-0006": false, "BF-0001": false} {
		if a := get(id); a.Removed != removed {
			t.Errorf("%s: Removed = %v, want %v", id, a.Removed, removed)
		}
	}
	if a := get("BF-0006"); !a.Recovered || !a.LastSeen.Equal(at(5, 6)) {
		t.Errorf("BF-0006: Recovered %v, LastSeen %v (want the dead recovery's time)", a.Recovered, a.LastSeen)
	}
	if a := get("BF-0007"); a.Captures != 3 {
		t.Errorf("BF-0007: Captures = %d, want 3 (twice on occasion 3)", a.Captures)
	}
	if !h.Notes.Has(capture.FindingNoOccasion) {
		t.Errorf("the record between windows is not noted: %+v", h.Notes)
	}

	// Summary, hand-worked from the table above (common practice).
	wantSum := []capture.OccasionSummary{
		{Occasion: 1, Caught: 3, Marked: 0, New: 3, Losses: 0, Released: 3, MarkedAtLarge: 0},
		{Occasion: 2, Caught: 3, Marked: 1, New: 2, Losses: 0, Released: 3, MarkedAtLarge: 3},
		{Occasion: 3, Caught: 4, Marked: 2, New: 2, Losses: 1, Released: 3, MarkedAtLarge: 5},
		{Occasion: 4, Caught: 3, Marked: 2, New: 1, Losses: 1, Released: 2, MarkedAtLarge: 6},
		{Occasion: 5, Caught: 3, Marked: 2, New: 1, Losses: 0, Released: 3, MarkedAtLarge: 6},
	}
	if got := h.Summary(); !reflect.DeepEqual(got, wantSum) {
		t.Errorf("summary:\n got %+v\nwant %+v", got, wantSum)
	}

	// M-array, hand-worked (common practice): rows are release occasions
	// 1-4, columns occasions 1-5.
	m := h.MArray()
	wantNext := [][]int{
		{0, 1, 1, 0, 0}, // released on 1: BF-0001 next on 2, BF-0002 next on 3, BF-0009 never
		{0, 0, 1, 1, 0}, // on 2: BF-0005 next on 3, BF-0001 on 4, BF-0006 never
		{0, 0, 0, 1, 1}, // on 3 (BF-0005 died): BF-0002 on 4, BF-0007 on 5, BF-0011 never
		{0, 0, 0, 0, 1}, // on 4 (BF-0008 removed): BF-0002 on 5, BF-0001 never
	}
	if !reflect.DeepEqual(m.Next, wantNext) || !reflect.DeepEqual(m.Released, []int{3, 3, 3, 2}) ||
		!reflect.DeepEqual(m.Recaptured, []int{2, 2, 2, 1}) || !reflect.DeepEqual(m.NeverRecaptured, []int{1, 1, 1, 1}) {
		t.Errorf("m-array: %+v", m)
	}
	if got := m.ColumnTotals(); !reflect.DeepEqual(got, []int{0, 1, 2, 2, 2}) {
		t.Errorf("m.j = %v, want the m_i of the summary [0 1 2 2 2]", got)
	}

	// Counting resights: BF-0006's resight on 3 becomes a capture.
	hr, err := capture.BuildHistories(storetest.Study(), caps, &capture.HistoryOptions{IncludeResights: true, GroupBy: "sex"})
	if err != nil {
		t.Fatal(err)
	}
	if got := histByID(hr)["BF-0006"]; got != "01100" {
		t.Errorf("with resights BF-0006 = %s, want 01100", got)
	}
	for _, a := range hr.Animals {
		if a.Group != string(a.Sex) {
			t.Errorf("GroupBy sex: %s has group %q, sex %q", a.ID, a.Group, a.Sex)
		}
	}
}

func TestBuildHistoriesNotes(t *testing.T) {
	st := storetest.Study()
	c := func(tag string, ev capture.Event, occ int, edit func(*capture.Capture)) capture.Capture {
		x := newCapture(tag, ev, occ)
		if edit != nil {
			edit(x)
		}
		return *x
	}
	caps := []capture.Capture{
		c("BF-0001", capture.EventNewMark, 1, func(x *capture.Capture) { x.Fate = capture.FateDied }),
		c("BF-0001", capture.EventRecapture, 2, func(x *capture.Capture) { x.Sex = capture.SexMale }),
		c("BF-0002", capture.EventResight, 2, nil),
		c("BF-0003", capture.EventNewMark, 1, func(x *capture.Capture) { x.StudyID = "elsewhere" }),
		c("BF-0005", capture.EventRetag, 2, func(x *capture.Capture) { x.OldTagID = "BF-0004" }),
		c("BF-0006", capture.EventRetag, 3, func(x *capture.Capture) { x.OldTagID = "BF-0004" }),
	}
	h, err := capture.BuildHistories(st, caps, nil)
	if err != nil {
		t.Fatal(err)
	}
	for _, code := range []string{capture.NoteCaughtAfterLoss, capture.NoteSexConflict, capture.NoteNotCaught, capture.NoteOtherStudy, capture.NoteBranchingChain} {
		if !h.Notes.Has(code) {
			t.Errorf("note %q missing: %+v", code, h.Notes)
		}
	}
	got := histByID(h)
	want := map[string]string{"BF-0001": "11000", "BF-0004": "01100"}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("histories %v, want %v", got, want)
	}
	if h.Animals[0].Removed {
		t.Errorf("an animal caught after its recorded loss is marked Removed")
	}
	if _, err := capture.BuildHistories(st, caps, &capture.HistoryOptions{GroupBy: "colour"}); err == nil {
		t.Errorf("unknown GroupBy accepted")
	}
}

func TestStoreHistories(t *testing.T) {
	s := openWithStudy(t)
	caps := handExample()
	// Deleted records go through DeleteCapture, as they would in use.
	var deleted []string
	for i := range caps {
		if caps[i].Revision.Deleted {
			caps[i].Revision.Deleted = false
			deleted = append(deleted, caps[i].ID)
		}
	}
	if _, err := s.PutCaptures(caps); err != nil {
		t.Fatal(err)
	}
	for _, id := range deleted {
		if err := s.DeleteCapture("fen-grid-2025", id); err != nil {
			t.Fatal(err)
		}
	}
	h, err := s.Histories("fen-grid-2025", nil)
	if err != nil {
		t.Fatal(err)
	}
	direct, _ := capture.BuildHistories(storetest.Study(), handExample(), nil)
	if !reflect.DeepEqual(histByID(h), histByID(direct)) {
		t.Errorf("store histories %v differ from BuildHistories %v", histByID(h), histByID(direct))
	}
	if _, err := s.Histories("nope", nil); err == nil {
		t.Errorf("histories of a missing study: no error")
	}
}

// readDipper reads testdata/dipper-marray.csv: R_i and m_ij.
func readDipper(t *testing.T) (R []int, m [][]int) {
	t.Helper()
	f, err := os.Open("testdata/dipper-marray.csv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	k := len(rows[0]) - 1 // columns: i, R, m_to_2..m_to_k
	for _, row := range rows[1:] {
		r, _ := strconv.Atoi(row[1])
		R = append(R, r)
		next := make([]int, k)
		for j := 2; j < len(row); j++ {
			if row[j] != "" {
				next[j-1], err = strconv.Atoi(row[j])
				if err != nil {
					t.Fatal(err)
				}
			}
		}
		m = append(m, next)
	}
	return R, m
}

// TestMArrayDipper builds individual histories that realise the published
// dipper m-array (Lebreton et al. 1992; from memory, see testdata/README.md)
// and checks that MArray gives back R_i and every m_ij exactly. What this
// checks: the m-array and summary code reproduce a published table through
// a round trip (table -> histories -> table); it is not an independent data
// set of raw histories.
func TestMArrayDipper(t *testing.T) {
	R, m := readDipper(t)
	k := len(m[0])
	var rows [][]bool
	arriving := make([][]int, k) // animals whose next capture is occasion j
	for i := 0; i < k-1; i++ {
		released := append([]int(nil), arriving[i]...)
		for len(released) < R[i] {
			rows = append(rows, make([]bool, k))
			released = append(released, len(rows)-1)
		}
		if len(released) != R[i] {
			t.Fatalf("occasion %d: %d birds arrive but only %d are released", i+1, len(released), R[i])
		}
		for _, a := range released {
			rows[a][i] = true
		}
		n := 0
		for j := i + 1; j < k; j++ {
			for c := 0; c < m[i][j]; c++ {
				arriving[j] = append(arriving[j], released[n])
				n++
			}
		}
	}
	for _, a := range arriving[k-1] {
		rows[a][k-1] = true
	}
	h := &capture.HistorySet{}
	for j := 1; j <= k; j++ {
		h.Occasions = append(h.Occasions, j)
	}
	for i, row := range rows {
		h.Animals = append(h.Animals, capture.AnimalHistory{ID: "D" + strconv.Itoa(i+1), Caught: row})
	}
	got := h.MArray()
	if !reflect.DeepEqual(got.Released, R) {
		t.Errorf("R_i = %v, want %v (Lebreton et al. 1992, from memory)", got.Released, R)
	}
	if !reflect.DeepEqual(got.Next, m) {
		t.Errorf("m_ij =\n%v\nwant\n%v (Lebreton et al. 1992, from memory)", got.Next, m)
	}
	sum := h.Summary()
	cols := got.ColumnTotals()
	for j := range sum {
		if sum[j].Marked != cols[j] {
			t.Errorf("occasion %d: summary m_i = %d, m-array m.j = %d", j+1, sum[j].Marked, cols[j])
		}
		if j < k-1 && sum[j].Released != R[j] {
			t.Errorf("occasion %d: summary R_i = %d, want %d", j+1, sum[j].Released, R[j])
		}
	}
	// Marked birds released before the last occasion: R_1 + sum of the
	// newly marked on 2..6 = 255 (arithmetic on the table: 22 + (60-11) +
	// (78-26) + (80-35) + (88-47) + (98-52)). The other 39 of the 294
	// birds were first caught on occasion 7 and are not in the m-array.
	if len(h.Animals) != 255 {
		t.Errorf("%d birds built, want 255", len(h.Animals))
	}
}

// naiveMArray recomputes the m-array by listing, for every animal, the
// pairs of consecutive captures: a second, independent implementation.
func naiveMArray(h *capture.HistorySet) (released []int, next [][]int) {
	k := len(h.Occasions)
	released = make([]int, k-1)
	next = make([][]int, k-1)
	for i := range next {
		next[i] = make([]int, k)
	}
	for _, a := range h.Animals {
		var occ []int
		for j, c := range a.Caught {
			if c {
				occ = append(occ, j)
			}
		}
		for n, i := range occ {
			last := n == len(occ)-1
			if i < k-1 && !(last && a.Removed) {
				released[i]++
			}
			if !last {
				next[i][occ[n+1]]++
			}
		}
	}
	return released, next
}

func randomHistories(r *rand.Rand, animals, k int) *capture.HistorySet {
	h := &capture.HistorySet{}
	for j := 1; j <= k; j++ {
		h.Occasions = append(h.Occasions, j)
	}
	for i := 0; i < animals; i++ {
		row := make([]bool, k)
		row[r.IntN(k)] = true
		for j := range row {
			if r.Float64() < 0.3 {
				row[j] = true
			}
		}
		h.Animals = append(h.Animals, capture.AnimalHistory{ID: "R" + strconv.Itoa(i), Caught: row, Removed: r.Float64() < 0.1})
	}
	return h
}

func TestMArrayAgainstNaive(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 7))
	for trial := 0; trial < 50; trial++ {
		h := randomHistories(r, 1+r.IntN(60), 2+r.IntN(8))
		m := h.MArray()
		rel, next := naiveMArray(h)
		if !reflect.DeepEqual(m.Released, rel) || !reflect.DeepEqual(m.Next, next) {
			t.Fatalf("trial %d: m-array differs from the pairwise count", trial)
		}
		// Identities (common practice): sum_i (n_i - l_i) over releases
		// equals R_i; sum of m_i equals sum of m.j; n_i = m_i + u_i;
		// animals = sum u_i.
		s := h.Summary()
		cols := m.ColumnTotals()
		newTotal := 0
		for j := range s {
			newTotal += s[j].New
			if s[j].Marked != cols[j] || s[j].Caught != s[j].Marked+s[j].New {
				t.Fatalf("trial %d occasion %d: %+v, m.j = %d", trial, j+1, s[j], cols[j])
			}
			if j < len(m.Released) && s[j].Released != m.Released[j] {
				t.Fatalf("trial %d occasion %d: R_i %d vs %d", trial, j+1, s[j].Released, m.Released[j])
			}
		}
		if newTotal != len(h.Animals) {
			t.Fatalf("trial %d: sum of u_i = %d, animals = %d", trial, newTotal, len(h.Animals))
		}
	}
}
