package analysis

import (
	"fmt"
	"math"
	"sort"

	"tagtally/capture"
	"tagtally/estimators"
)

// FromHistorySet converts capture histories into the estimators' input.
//
//   - Caught and Removed are copied row by row.
//   - Individual covariates are those of AnimalHistory.Covariates, plus
//     "mass" (grams) from MassG and "male" (1 male, 0 female) from Sex. A
//     covariate is kept only when every animal has a finite value: the
//     likelihood models cannot use an animal with a missing covariate, and
//     dropping animals would bias N. Each covariate left out is named in
//     the returned notes.
//   - Groups are the animals' Group labels when every animal has one.
//
// An empty set gives an error wrapping estimators.ErrNoData; rows of
// unequal length or an animal never caught, estimators.ErrInvalidInput.
func FromHistorySet(hs *capture.HistorySet) (*estimators.Histories, []string, error) {
	if hs == nil || len(hs.Animals) == 0 {
		return nil, nil, fmt.Errorf("capture histories: %w: no animals", estimators.ErrNoData)
	}
	n := len(hs.Animals)
	h := &estimators.Histories{Caught: make([][]bool, n), Removed: make([]bool, n)}
	anyRemoved := false
	values := map[string][]float64{}
	present := map[string]int{}
	put := func(name string, i int, v float64) {
		if values[name] == nil {
			values[name] = make([]float64, n)
		}
		if !math.IsNaN(v) && !math.IsInf(v, 0) {
			values[name][i] = v
			present[name]++
		}
	}
	groups := make([]string, n)
	allGrouped := true
	for i := range hs.Animals {
		a := &hs.Animals[i]
		h.Caught[i] = append([]bool(nil), a.Caught...)
		h.Removed[i] = a.Removed
		anyRemoved = anyRemoved || a.Removed
		for name, v := range a.Covariates {
			put(name, i, v)
		}
		if a.MassG != nil {
			put("mass", i, *a.MassG)
		}
		switch a.Sex {
		case capture.SexMale:
			put("male", i, 1)
		case capture.SexFemale:
			put("male", i, 0)
		}
		groups[i] = a.Group
		allGrouped = allGrouped && a.Group != ""
	}
	if !anyRemoved {
		h.Removed = nil
	}
	if allGrouped {
		h.Groups = groups
	}
	var notes []string
	names := make([]string, 0, len(values))
	for name := range values {
		names = append(names, name)
	}
	sort.Strings(names)
	for _, name := range names {
		if present[name] < n {
			notes = append(notes, fmt.Sprintf("covariate %q left out: known for %d of %d animals", name, present[name], n))
			continue
		}
		if h.Covariates == nil {
			h.Covariates = map[string][]float64{}
		}
		h.Covariates[name] = values[name]
	}
	if err := h.Validate(); err != nil {
		return nil, notes, err
	}
	return h, notes, nil
}
