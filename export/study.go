package export

import (
	"fmt"
	"sort"
	"strings"

	"tagtally/capture"
)

// IndividualsSheet has one row per animal: its tag chain, capture history
// string, first and last seen, sex, age, mass and any other covariates.
func IndividualsSheet(h *capture.HistorySet) Sheet {
	covNames := covariateNames(h)
	cols := []Column{
		{Header: "animal", Width: 12},
		{Header: "tags", Width: 20},
		{Header: "history", Width: float64(max(12, len(h.Occasions)+2))},
		{Header: "captures", Kind: Integer},
		{Header: "first_seen", Kind: Date},
		{Header: "last_seen", Kind: Date},
		{Header: "species", Width: 20},
		{Header: "sex"},
		{Header: "age"},
		{Header: "mass_g", Kind: Number},
		{Header: "lost_on_capture"},
		{Header: "group"},
	}
	for _, n := range covNames {
		cols = append(cols, Column{Header: n, Kind: Number})
	}
	return Sheet{
		Name:    "Individuals",
		Columns: cols,
		Stream:  true,
		Rows: func(emit func([]any) error) error {
			row := make([]any, len(cols))
			for i := range h.Animals {
				a := &h.Animals[i]
				row[0] = a.ID
				row[1] = strings.Join(a.Tags, " > ")
				row[2] = HistoryString(a.Caught)
				row[3] = a.Captures
				row[4] = a.FirstSeen
				row[5] = a.LastSeen
				row[6] = a.Species
				row[7] = string(a.Sex)
				row[8] = string(a.Age)
				row[9] = a.MassG
				row[10] = yesNo(a.Removed)
				row[11] = a.Group
				for k, n := range covNames {
					if v, ok := a.Covariates[n]; ok {
						row[12+k] = v
					} else {
						row[12+k] = nil
					}
				}
				if err := emit(row); err != nil {
					return err
				}
			}
			return nil
		},
	}
}

func covariateNames(h *capture.HistorySet) []string {
	set := map[string]bool{}
	for i := range h.Animals {
		for n := range h.Animals[i].Covariates {
			set[n] = true
		}
	}
	out := make([]string, 0, len(set))
	for n := range set {
		if n != "mass_g" && n != "mass" {
			out = append(out, n)
		}
	}
	sort.Strings(out)
	return out
}

// HistoryString writes a capture history as 0/1 characters.
func HistoryString(caught []bool) string {
	b := make([]byte, len(caught))
	for i, c := range caught {
		b[i] = '0'
		if c {
			b[i] = '1'
		}
	}
	return string(b)
}

// OccasionsSheet has one row per occasion: n_i caught, m_i already marked,
// u_i newly marked, l_i lost on capture, R_i released, M_i marked at large,
// then the m-array row for releases on that occasion (m_ij: next caught on
// occasion j) and r_i, the number of them ever caught again.
func OccasionsSheet(sum []capture.OccasionSummary, m *capture.MArray) Sheet {
	cols := []Column{
		{Header: "occasion", Kind: Integer},
		{Header: "caught n_i", Kind: Integer},
		{Header: "already marked m_i", Kind: Integer},
		{Header: "newly marked u_i", Kind: Integer},
		{Header: "lost on capture l_i", Kind: Integer},
		{Header: "released R_i", Kind: Integer},
		{Header: "marked at large M_i", Kind: Integer},
	}
	k := len(m.Occasions)
	for j := 1; j < k; j++ {
		cols = append(cols, Column{Header: fmt.Sprintf("next caught on %d", m.Occasions[j]), Kind: Integer})
	}
	cols = append(cols, Column{Header: "caught again r_i", Kind: Integer})
	return Sheet{
		Name:    "Occasions",
		Columns: cols,
		Charts:  []Chart{{Title: "Animals caught per occasion", Kind: "bar", Category: 0, Series: []int{2, 3}, YTitle: "animals"}},
		Rows: func(emit func([]any) error) error {
			for i, s := range sum {
				row := []any{s.Occasion, s.Caught, s.Marked, s.New, s.Losses, s.Released, s.MarkedAtLarge}
				for j := 1; j < k; j++ {
					if i < len(m.Next) && j > i {
						row = append(row, m.Next[i][j])
					} else {
						row = append(row, nil)
					}
				}
				if i < len(m.Recaptured) {
					row = append(row, m.Recaptured[i])
				} else {
					row = append(row, nil)
				}
				if err := emit(row); err != nil {
					return err
				}
			}
			return nil
		},
	}
}
