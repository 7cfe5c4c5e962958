package open

import (
	"encoding/csv"
	"errors"
	"os"
	"reflect"
	"strconv"
	"strings"
	"testing"

	"tagtally/estimators"
)

// readMArrayCSV reads an m-array file of testdata: an optional leading
// "group" column, then release occasion, R, and m_to_2..m_to_T. It returns
// the groups in file order and one m-array per group.
func readMArrayCSV(t *testing.T, path string) ([]string, []MArray) {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	recs, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	head := recs[0]
	off := 0
	if head[0] == "group" {
		off = 1
	}
	occ := len(head) - off - 2 + 1
	var names []string
	byName := map[string]*MArray{}
	for _, rec := range recs[1:] {
		g := ""
		if off == 1 {
			g = rec[0]
		}
		m, ok := byName[g]
		if !ok {
			m = &MArray{Released: make([]int, occ), M: make([][]int, occ)}
			for i := range m.M {
				m.M[i] = make([]int, occ)
			}
			byName[g] = m
			names = append(names, g)
		}
		i := atoi(t, rec[off]) - 1
		m.Released[i] = atoi(t, rec[off+1])
		for k, cell := range rec[off+2:] {
			if strings.TrimSpace(cell) != "" {
				m.M[i][k+1] = atoi(t, cell)
			}
		}
	}
	out := make([]MArray, len(names))
	for k, n := range names {
		out[k] = *byName[n]
	}
	return names, out
}

func atoi(t *testing.T, s string) int {
	t.Helper()
	v, err := strconv.Atoi(strings.TrimSpace(s))
	if err != nil {
		t.Fatal(err)
	}
	return v
}

func histories(t *testing.T, rows ...string) *estimators.Histories {
	t.Helper()
	h := &estimators.Histories{}
	for _, r := range rows {
		removed := strings.HasSuffix(r, "x")
		row, err := estimators.ParseHistory(strings.TrimSuffix(r, "x"))
		if err != nil {
			t.Fatal(err)
		}
		h.Caught = append(h.Caught, row)
		h.Removed = append(h.Removed, removed)
	}
	return h
}

// TestFromHistories checks the m-array and summary against a count done
// by hand on six animals over four occasions; "x" marks an animal lost on
// capture at its last capture.
func TestFromHistories(t *testing.T) {
	h := histories(t,
		"1100",  // released 1, next caught 2 (m12), released 2, never again
		"1010",  // m13, released 3
		"0111x", // m23, m34, lost at 4 (not in R4)
		"1001",  // m14
		"0110x", // m23, lost at 3 (not in R3)
		"0001",  // new at 4
	)
	m, s, err := FromHistories(h)
	if err != nil {
		t.Fatal(err)
	}
	// Hand count (this test's author): catches per occasion n = 3, 3, 3, 3;
	// releases R = 3, 3, 2, 2 (losses: one at 3, one at 4).
	wantM := MArray{
		Released: []int{3, 3, 2, 2},
		M: [][]int{
			{0, 1, 1, 1},
			{0, 0, 2, 0},
			{0, 0, 0, 1},
			{0, 0, 0, 0},
		},
	}
	if !reflect.DeepEqual(m, wantM) {
		t.Fatalf("m-array = %+v, want %+v", m, wantM)
	}
	want := Summary{
		Caught:      []int{3, 3, 3, 3},
		Marked:      []int{0, 1, 3, 2},
		Released:    []int{3, 3, 2, 2},
		Recaptured:  []int{3, 2, 1, 0},
		MissedAlive: []int{0, 2, 1, 0}, // z2: "1010","1001"; z3: "1001"
	}
	if !reflect.DeepEqual(s, want) {
		t.Fatalf("summary = %+v, want %+v", s, want)
	}
	if s.Lost(2) != 1 || s.Lost(3) != 1 || s.Unmarked(3) != 1 {
		t.Errorf("losses or unmarked wrong: %d %d %d", s.Lost(2), s.Lost(3), s.Unmarked(3))
	}
}

func TestGroupMArrays(t *testing.T) {
	h := histories(t, "110", "011", "101", "111")
	h.Groups = []string{"male", "female", "male", ""}
	names, ms, err := GroupMArrays(h)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(names, []string{"(none)", "female", "male"}) {
		t.Fatalf("groups %v", names)
	}
	// male: "110" and "101": R = 2,1,1; m12 = 1, m13 = 1.
	if !reflect.DeepEqual(ms[2].Released, []int{2, 1, 1}) || ms[2].M[0][1] != 1 || ms[2].M[0][2] != 1 {
		t.Errorf("male m-array %+v", ms[2])
	}
	h.Groups = nil
	if _, _, err := GroupMArrays(h); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("no labels: err = %v", err)
	}
}

func TestMArrayValidate(t *testing.T) {
	ok := MArray{Released: []int{5, 5, 0}, M: [][]int{{0, 2, 1}, {0, 0, 3}, {0, 0, 0}}}
	if err := ok.Validate(); err != nil {
		t.Fatal(err)
	}
	bad := []MArray{
		{},
		{Released: []int{5, 5, 0}, M: [][]int{{0, 2, 1}, {0, 0, 3}}},
		{Released: []int{5, 5, 0}, M: [][]int{{0, 2, 1}, {0, 0, 3}, {0, 0}}},
		{Released: []int{5, -1, 0}, M: [][]int{{0, 2, 1}, {0, 0, 0}, {0, 0, 0}}},
		{Released: []int{5, 5, 0}, M: [][]int{{0, -2, 1}, {0, 0, 3}, {0, 0, 0}}},
		{Released: []int{5, 5, 0}, M: [][]int{{1, 2, 1}, {0, 0, 3}, {0, 0, 0}}},
		{Released: []int{2, 5, 0}, M: [][]int{{0, 2, 1}, {0, 0, 3}, {0, 0, 0}}},
	}
	for k, m := range bad {
		err := m.Validate()
		if !errors.Is(err, estimators.ErrInvalidInput) && !errors.Is(err, estimators.ErrNoData) {
			t.Errorf("case %d: err = %v, want invalid input", k, err)
		}
	}
	if _, err := Summarize(ok, []int{5, 4, 4}); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("R above n: err = %v", err)
	}
	if _, err := Summarize(ok, []int{5, 5}); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("short catch counts: err = %v", err)
	}
}

func TestFromHistoriesBadInput(t *testing.T) {
	for name, h := range map[string]*estimators.Histories{
		"nil":          nil,
		"never caught": {Caught: [][]bool{{false, false, false}}},
		"ragged":       {Caught: [][]bool{{true, false, true}, {true}}},
	} {
		if _, _, err := FromHistories(h); err == nil {
			t.Errorf("%s: no error", name)
		}
	}
}
