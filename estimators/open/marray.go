package open

import (
	"fmt"
	"sort"

	"tagtally/estimators"
)

// MArray is the reduced m-array of a live-recapture study with T
// occasions (Burnham et al. 1987; Lebreton et al. 1992): for
// each occasion i, the number of animals released, and how many of those
// were next caught on each later occasion j. Occasions are numbered from 0
// in the slices; text and parameter names number them from 1.
//
// Invariants (checked by Validate): len(Released) == len(M) == T, every
// row of M has length T, M[i][j] == 0 for j <= i, all counts are
// non-negative and each row sums to at most Released[i]. Animals released
// on the last occasion (Released[T-1]) carry no information on survival;
// the entry may be 0 when it is not known.
type MArray struct {
	// Released[i] is R_i, the number of animals released on occasion i
	// after losses on capture: newly marked and recaptured animals alike.
	Released []int `json:"released"`
	// M[i][j] is m_ij, the number of the R_i animals released on occasion
	// i that were next caught on occasion j > i.
	M [][]int `json:"m"`
}

// Occasions returns T, the number of occasions.
func (m MArray) Occasions() int { return len(m.Released) }

// Validate checks the invariants listed on MArray.
func (m MArray) Validate() error {
	t := len(m.Released)
	if t == 0 {
		return fmt.Errorf("m-array: %w: no occasions", estimators.ErrNoData)
	}
	if len(m.M) != t {
		return fmt.Errorf("m-array: %w: %d release counts but %d rows", estimators.ErrInvalidInput, t, len(m.M))
	}
	for i, row := range m.M {
		if len(row) != t {
			return fmt.Errorf("m-array: %w: row %d has %d columns, want %d", estimators.ErrInvalidInput, i+1, len(row), t)
		}
		if m.Released[i] < 0 {
			return fmt.Errorf("m-array: %w: negative release count on occasion %d", estimators.ErrInvalidInput, i+1)
		}
		sum := 0
		for j, v := range row {
			if v < 0 {
				return fmt.Errorf("m-array: %w: negative count m[%d][%d]", estimators.ErrInvalidInput, i+1, j+1)
			}
			if j <= i && v != 0 {
				return fmt.Errorf("m-array: %w: m[%d][%d] = %d, but animals can only be recaught on a later occasion", estimators.ErrInvalidInput, i+1, j+1, v)
			}
			sum += v
		}
		if sum > m.Released[i] {
			return fmt.Errorf("m-array: %w: %d animals released on occasion %d but %d recaught", estimators.ErrInvalidInput, m.Released[i], i+1, sum)
		}
	}
	return nil
}

// Recaptured returns r_i = Σ_j m_ij, how many of the animals released on
// each occasion were ever caught again.
func (m MArray) Recaptured() []int {
	r := make([]int, len(m.M))
	for i, row := range m.M {
		for _, v := range row {
			r[i] += v
		}
	}
	return r
}

// Summary is the per-occasion summary used by the Jolly-Seber estimates
// (notation of Jolly 1965, Seber 1982 and Pollock et al. 1990). All
// slices have length T.
type Summary struct {
	// Caught is n_i, the number of animals caught on occasion i.
	Caught []int `json:"n"`
	// Marked is m_i, the number of those that carried a mark from an
	// earlier occasion.
	Marked []int `json:"m"`
	// Released is R_i (s_i in Jolly 1965), the number released after the
	// occasion: n_i less the losses on capture.
	Released []int `json:"R"`
	// Recaptured is r_i, the number of the R_i caught again later.
	Recaptured []int `json:"r"`
	// MissedAlive is z_i, the number of animals caught before i, not
	// caught on i and caught after i: known alive but missed.
	MissedAlive []int `json:"z"`
}

// Occasions returns T.
func (s Summary) Occasions() int { return len(s.Caught) }

// Unmarked returns u_i = n_i - m_i for occasion i.
func (s Summary) Unmarked(i int) int { return s.Caught[i] - s.Marked[i] }

// Lost returns the losses on capture n_i - R_i for occasion i.
func (s Summary) Lost(i int) int { return s.Caught[i] - s.Released[i] }

// Summarize derives the per-occasion summary from an m-array and the
// numbers caught n_i: m_i is the column sum of the m-array, r_i its row
// sum, and z_i = Σ_{h<i} Σ_{j>i} m_hj. It checks that the counts agree
// (m_i <= n_i, R_i <= n_i).
func Summarize(m MArray, caught []int) (Summary, error) {
	if err := m.Validate(); err != nil {
		return Summary{}, err
	}
	t := m.Occasions()
	if len(caught) != t {
		return Summary{}, fmt.Errorf("summary: %w: %d catch counts for %d occasions", estimators.ErrInvalidInput, len(caught), t)
	}
	s := Summary{
		Caught:      append([]int(nil), caught...),
		Marked:      make([]int, t),
		Released:    append([]int(nil), m.Released...),
		Recaptured:  m.Recaptured(),
		MissedAlive: make([]int, t),
	}
	for h := 0; h < t; h++ {
		for j := h + 1; j < t; j++ {
			v := m.M[h][j]
			s.Marked[j] += v
			for i := h + 1; i < j; i++ {
				s.MissedAlive[i] += v
			}
		}
	}
	for i := 0; i < t; i++ {
		if caught[i] < 0 {
			return Summary{}, fmt.Errorf("summary: %w: negative catch on occasion %d", estimators.ErrInvalidInput, i+1)
		}
		if s.Marked[i] > caught[i] {
			return Summary{}, fmt.Errorf("summary: %w: %d marked animals recaught on occasion %d but only %d caught", estimators.ErrInvalidInput, s.Marked[i], i+1, caught[i])
		}
		if s.Released[i] > caught[i] {
			return Summary{}, fmt.Errorf("summary: %w: %d released on occasion %d but only %d caught", estimators.ErrInvalidInput, s.Released[i], i+1, caught[i])
		}
	}
	return s, nil
}

// FromHistories builds the m-array and the per-occasion summary from a
// capture-history matrix. Each animal contributes n_i on every occasion it
// was caught, m_i on every capture after its first, one m-array cell for
// each pair of consecutive captures, and R_i on every capture at which it
// was released. An animal whose Removed flag is set was lost on capture at
// its last capture: it counts in n_i there but not in R_i, so it is never
// expected to be seen again.
//
// The cost is one pass over the matrix; everything after it depends only
// on the number of occasions.
func FromHistories(h *estimators.Histories) (MArray, Summary, error) {
	if err := h.Validate(); err != nil {
		return MArray{}, Summary{}, fmt.Errorf("open population: %w", err)
	}
	m, caught := build(h, nil)
	s, err := Summarize(m, caught)
	if err != nil {
		return MArray{}, Summary{}, fmt.Errorf("open population: %w", err)
	}
	return m, s, nil
}

// GroupMArrays builds one m-array per group (h.Groups, e.g. sex), for the
// group models of CJSGroups. Groups are returned in sorted order of their
// labels; an empty label is a group of its own named "(none)".
func GroupMArrays(h *estimators.Histories) ([]string, []MArray, error) {
	if err := h.Validate(); err != nil {
		return nil, nil, fmt.Errorf("open population by group: %w", err)
	}
	if h.Groups == nil {
		return nil, nil, fmt.Errorf("open population by group: %w: the histories have no group labels", estimators.ErrInvalidInput)
	}
	seen := map[string]bool{}
	for _, g := range h.Groups {
		seen[groupLabel(g)] = true
	}
	names := make([]string, 0, len(seen))
	for g := range seen {
		names = append(names, g)
	}
	sort.Strings(names)
	ms := make([]MArray, len(names))
	for k, g := range names {
		g := g
		ms[k], _ = build(h, func(a int) bool { return groupLabel(h.Groups[a]) == g })
	}
	return names, ms, nil
}

func groupLabel(g string) string {
	if g == "" {
		return "(none)"
	}
	return g
}

// build does the single pass of FromHistories over the animals for which
// keep is nil or true. h must be valid.
func build(h *estimators.Histories, keep func(int) bool) (MArray, []int) {
	t := h.Occasions()
	m := MArray{Released: make([]int, t), M: make([][]int, t)}
	cells := make([]int, t*t)
	for i := range m.M {
		m.M[i] = cells[i*t : (i+1)*t : (i+1)*t]
	}
	caught := make([]int, t)
	for a, row := range h.Caught {
		if keep != nil && !keep(a) {
			continue
		}
		removed := h.Removed != nil && h.Removed[a]
		last := -1
		for j := t - 1; j >= 0; j-- {
			if row[j] {
				last = j
				break
			}
		}
		prev := -1
		for j, c := range row {
			if !c {
				continue
			}
			caught[j]++
			if prev >= 0 {
				m.M[prev][j]++
			}
			if !(removed && j == last) {
				m.Released[j]++
			}
			prev = j
		}
	}
	return m, caught
}
