package demography

import (
	"fmt"
	"math"
	"sort"

	"tagtally/estimators"
)

// AllGroups labels a margin of the mass table: every sex or every age.
const AllGroups = "all"

// MassRecord is one body mass in grams with the animal's sex and age
// class as recorded (empty means unknown).
type MassRecord struct {
	Sex  string  `json:"sex"`
	Age  string  `json:"age"`
	Mass float64 `json:"mass_g"`
}

// MassGroup summarises the masses of one sex and age class.
type MassGroup struct {
	Sex string `json:"sex"`
	Age string `json:"age"`
	N   int    `json:"n"`
	// Mean, SD (divisor n-1) and SE = SD/sqrt(n), in grams. With n = 1 SD
	// and SE are 0 and HasSD is false.
	Mean  float64 `json:"mean_g"`
	SD    float64 `json:"sd_g"`
	SE    float64 `json:"se_g"`
	HasSD bool    `json:"has_sd"`
	Min   float64 `json:"min_g"`
	Max   float64 `json:"max_g"`
}

// MassSummary is body mass by sex and age class with the margins.
type MassSummary struct {
	// Groups lists every sex × age cell present, then each sex over all
	// ages, each age over all sexes, and last the grand total (sex and age
	// both AllGroups). Within each part rows are sorted by sex, then age.
	Groups      []MassGroup `json:"groups"`
	Assumptions []string    `json:"assumptions"`
	Warnings    []string    `json:"warnings,omitempty"`
}

// Group returns the row for a sex and age (either may be AllGroups).
func (s *MassSummary) Group(sex, age string) (MassGroup, bool) {
	for _, g := range s.Groups {
		if g.Sex == sex && g.Age == age {
			return g, true
		}
	}
	return MassGroup{}, false
}

// MassBySexAndAge summarises body mass by sex and age class: n, mean,
// SD (n-1 divisor, computed by Welford's one-pass update, which stays
// accurate for masses with a large mean and small spread) and SE. Pass one
// mass per animal (e.g. at first capture) unless repeated weighings are
// what you want to describe: repeated masses of one animal are not
// independent. Empty sex or age is shown as UnknownClass. A mass that is
// not a positive finite number is ErrInvalidInput with its index; no
// records is ErrNoData.
func MassBySexAndAge(records []MassRecord) (*MassSummary, error) {
	const prefix = "mass by sex and age"
	if len(records) == 0 {
		return nil, fmt.Errorf("%s: %w: no masses", prefix, estimators.ErrNoData)
	}
	type key struct{ sex, age string }
	acc := map[key]*welford{}
	add := func(k key, x float64) {
		w := acc[k]
		if w == nil {
			w = &welford{min: math.Inf(1), max: math.Inf(-1)}
			acc[k] = w
		}
		w.add(x)
	}
	for i, r := range records {
		if !(r.Mass > 0) || math.IsInf(r.Mass, 0) {
			return nil, fmt.Errorf("%s: record %d has mass %v g; a mass must be a positive number: %w",
				prefix, i, r.Mass, estimators.ErrInvalidInput)
		}
		sex, age := r.Sex, r.Age
		if sex == "" {
			sex = UnknownClass
		}
		if age == "" {
			age = UnknownClass
		}
		add(key{sex, age}, r.Mass)
		add(key{sex, AllGroups}, r.Mass)
		add(key{AllGroups, age}, r.Mass)
		add(key{AllGroups, AllGroups}, r.Mass)
	}
	keys := make([]key, 0, len(acc))
	for k := range acc {
		keys = append(keys, k)
	}
	part := func(k key) int {
		switch {
		case k.sex != AllGroups && k.age != AllGroups:
			return 0
		case k.age == AllGroups && k.sex != AllGroups:
			return 1
		case k.sex == AllGroups && k.age != AllGroups:
			return 2
		}
		return 3
	}
	sort.Slice(keys, func(i, j int) bool {
		a, b := keys[i], keys[j]
		if pa, pb := part(a), part(b); pa != pb {
			return pa < pb
		}
		if a.sex != b.sex {
			return a.sex < b.sex
		}
		return a.age < b.age
	})
	s := &MassSummary{Assumptions: []string{
		"Each animal contributes one mass, or repeated weighings are meant to be described rather than compared.",
		"Scales are calibrated and masses exclude bags or holders.",
	}}
	single := 0
	for _, k := range keys {
		w := acc[k]
		g := MassGroup{Sex: k.sex, Age: k.age, N: w.n, Mean: w.mean, Min: w.min, Max: w.max}
		if w.n >= 2 {
			g.SD = math.Sqrt(w.m2 / float64(w.n-1))
			g.SE = g.SD / math.Sqrt(float64(w.n))
			g.HasSD = true
		} else if part(k) == 0 {
			single++
		}
		s.Groups = append(s.Groups, g)
	}
	if single > 0 {
		s.Warnings = append(s.Warnings, fmt.Sprintf("%d sex × age groups have a single mass, so no SD.", single))
	}
	return s, nil
}

// welford accumulates a mean and sum of squared deviations in one pass
// (Welford 1962).
type welford struct {
	n        int
	mean, m2 float64
	min, max float64
}

func (w *welford) add(x float64) {
	w.n++
	d := x - w.mean
	w.mean += d / float64(w.n)
	w.m2 += d * (x - w.mean)
	w.min = math.Min(w.min, x)
	w.max = math.Max(w.max, x)
}
