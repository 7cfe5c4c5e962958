package demography

import (
	"fmt"
	"sort"

	"tagtally/estimators"
)

// UnknownClass is the class given to a record with no age class.
const UnknownClass = "unknown"

// AgeRecord says an animal was caught on an occasion and judged to be of
// an age class (e.g. "juvenile", "subadult", "adult").
type AgeRecord struct {
	Animal   string `json:"animal"`
	Occasion int    `json:"occasion"`
	Class    string `json:"class"`
}

// AgeStructureResult is the age-class make-up of the catch on each
// occasion.
type AgeStructureResult struct {
	// Classes in column order; Occasions in row order (ascending).
	Classes   []string `json:"classes"`
	Occasions []int    `json:"occasions"`
	// Counts[i][j] is the number of distinct animals of class j caught on
	// occasion i; Totals[i] is their sum.
	Counts [][]int `json:"counts"`
	Totals []int   `json:"totals"`
	// Proportions[i][j] is Counts[i][j]/Totals[i] with SE and an exact
	// Clopper-Pearson 95% interval.
	Proportions [][]estimators.Value `json:"proportions"`
	// Overall counts each animal once per class over all occasions.
	Overall     []int    `json:"overall"`
	Assumptions []string `json:"assumptions"`
	Warnings    []string `json:"warnings,omitempty"`
}

// AgeStructure tabulates age classes by occasion. Give one record per
// capture: an animal caught twice on one occasion counts once there, and
// if its two records disagree on the class that is ErrInvalidInput (fix
// the record rather than let the table guess). classes fixes the column
// order (youngest first reads best); classes seen in the records but not
// listed are appended in alphabetical order, and a record with an empty
// class is counted as UnknownClass. Proportions use only the animals
// caught on that occasion. No records is ErrNoData.
func AgeStructure(records []AgeRecord, classes []string) (*AgeStructureResult, error) {
	const prefix = "age structure"
	if len(records) == 0 {
		return nil, fmt.Errorf("%s: %w: no records", prefix, estimators.ErrNoData)
	}
	col := map[string]int{}
	var cls []string
	for _, c := range classes {
		if c == "" {
			c = UnknownClass
		}
		if _, dup := col[c]; dup {
			return nil, fmt.Errorf("%s: class %q is listed twice: %w", prefix, c, estimators.ErrInvalidInput)
		}
		col[c] = len(cls)
		cls = append(cls, c)
	}
	var extra []string
	type key struct {
		animal   string
		occasion int
	}
	seen := map[key]string{}
	occSet := map[int]bool{}
	for i, r := range records {
		if r.Animal == "" {
			return nil, fmt.Errorf("%s: record %d has no animal: %w", prefix, i, estimators.ErrInvalidInput)
		}
		c := r.Class
		if c == "" {
			c = UnknownClass
		}
		k := key{r.Animal, r.Occasion}
		if prev, ok := seen[k]; ok && prev != c {
			return nil, fmt.Errorf("%s: animal %q is recorded as %q and %q on occasion %d: %w",
				prefix, r.Animal, prev, c, r.Occasion, estimators.ErrInvalidInput)
		}
		seen[k] = c
		occSet[r.Occasion] = true
		if _, ok := col[c]; !ok {
			col[c] = -1 // placed below
			extra = append(extra, c)
		}
	}
	sort.Strings(extra)
	for _, c := range extra {
		col[c] = len(cls)
		cls = append(cls, c)
	}
	occs := make([]int, 0, len(occSet))
	for o := range occSet {
		occs = append(occs, o)
	}
	sort.Ints(occs)
	row := map[int]int{}
	for i, o := range occs {
		row[o] = i
	}
	res := &AgeStructureResult{
		Classes:   cls,
		Occasions: occs,
		Counts:    make([][]int, len(occs)),
		Totals:    make([]int, len(occs)),
		Overall:   make([]int, len(cls)),
		Assumptions: []string{
			"Age classes are judged the same way on every occasion.",
			"All age classes are equally catchable; otherwise the proportions describe the catch, not the population.",
		},
	}
	for i := range res.Counts {
		res.Counts[i] = make([]int, len(cls))
	}
	type animalClass struct {
		animal, class string
	}
	overall := map[animalClass]bool{}
	for k, c := range seen {
		res.Counts[row[k.occasion]][col[c]]++
		res.Totals[row[k.occasion]]++
		if !overall[animalClass{k.animal, c}] {
			overall[animalClass{k.animal, c}] = true
			res.Overall[col[c]]++
		}
	}
	res.Proportions = make([][]estimators.Value, len(occs))
	for i := range occs {
		res.Proportions[i] = make([]estimators.Value, len(cls))
		n := res.Totals[i]
		for j, x := range res.Counts[i] {
			iv, err := ClopperPearson(x, n, estimators.DefaultLevel)
			if err != nil {
				return nil, fmt.Errorf("%s: %w", prefix, err)
			}
			p := float64(x) / float64(n)
			res.Proportions[i][j] = estimators.Value{Estimate: p, SE: sqrt(p * (1 - p) / float64(n)), Interval: iv}
		}
	}
	if j, ok := col[UnknownClass]; ok && res.Overall[j] > 0 {
		res.Warnings = append(res.Warnings, fmt.Sprintf("%d animals have no recorded age class on some occasion; they are shown as %q.", res.Overall[j], UnknownClass))
	}
	return res, nil
}
