package closed

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"

	"tagtally/estimators"
)

// Census holds the per-occasion counts of a multiple-census (Schnabel)
// experiment, one entry per occasion in time order. All slices have the
// same length.
type Census struct {
	// Caught is C_t, the number of animals caught on occasion t.
	Caught []int `json:"caught"`
	// Recaptured is R_t, how many of them already carried a mark.
	Recaptured []int `json:"recaptured"`
	// NewMarks is U_t, the unmarked animals caught on occasion t that were
	// marked and released. Nil means every unmarked animal was released
	// (U_t = C_t - R_t).
	NewMarks []int `json:"new_marks,omitempty"`
	// LostMarked is the number of recaptured (already marked) animals lost
	// on capture at occasion t: not released, so they leave the marked
	// pool. Nil means none.
	LostMarked []int `json:"lost_marked,omitempty"`
}

// MarkedAtLarge returns M_t, the number of marked animals in the
// population just before each occasion:
//
//	M_1 = 0,  M_{t+1} = M_t + U_t - LostMarked_t.
func (c Census) MarkedAtLarge() []int {
	m := make([]int, len(c.Caught))
	for t := 1; t < len(c.Caught); t++ {
		m[t] = m[t-1] + c.newMarks(t-1) - c.lost(t-1)
	}
	return m
}

func (c Census) newMarks(t int) int {
	if c.NewMarks == nil {
		return c.Caught[t] - c.Recaptured[t]
	}
	return c.NewMarks[t]
}

func (c Census) lost(t int) int {
	if c.LostMarked == nil {
		return 0
	}
	return c.LostMarked[t]
}

// Validate checks lengths, signs and the consistency of the counts.
func (c Census) Validate() error {
	s := len(c.Caught)
	if s == 0 {
		return fmt.Errorf("census counts: %w: no occasions", estimators.ErrNoData)
	}
	if len(c.Recaptured) != s {
		return fmt.Errorf("census counts: %w: %d recapture counts for %d occasions", estimators.ErrInvalidInput, len(c.Recaptured), s)
	}
	if c.NewMarks != nil && len(c.NewMarks) != s {
		return fmt.Errorf("census counts: %w: %d new-mark counts for %d occasions", estimators.ErrInvalidInput, len(c.NewMarks), s)
	}
	if c.LostMarked != nil && len(c.LostMarked) != s {
		return fmt.Errorf("census counts: %w: %d loss counts for %d occasions", estimators.ErrInvalidInput, len(c.LostMarked), s)
	}
	marked := 0
	total := 0
	for t := 0; t < s; t++ {
		ct, rt, ut, lt := c.Caught[t], c.Recaptured[t], c.newMarks(t), c.lost(t)
		if ct < 0 || rt < 0 || ut < 0 || lt < 0 {
			return fmt.Errorf("census counts: %w: negative count at occasion %d", estimators.ErrInvalidInput, t+1)
		}
		if rt > ct {
			return fmt.Errorf("census counts: %w: occasion %d has %d recaptures among %d caught", estimators.ErrInvalidInput, t+1, rt, ct)
		}
		if rt > marked {
			return fmt.Errorf("census counts: %w: occasion %d has %d recaptures but only %d marked animals were at large", estimators.ErrInvalidInput, t+1, rt, marked)
		}
		if ut > ct-rt {
			return fmt.Errorf("census counts: %w: occasion %d marks %d new animals but caught only %d unmarked", estimators.ErrInvalidInput, t+1, ut, ct-rt)
		}
		if lt > rt {
			return fmt.Errorf("census counts: %w: occasion %d loses %d marked animals but recaptured only %d", estimators.ErrInvalidInput, t+1, lt, rt)
		}
		marked += ut - lt
		total += ct
	}
	if total == 0 {
		return fmt.Errorf("census counts: %w: nothing was caught", estimators.ErrNoData)
	}
	return nil
}

// CensusFromHistories derives per-occasion counts from capture histories.
// An animal flagged in Removed is lost at its last capture: if that capture
// is its first it never joins the marked pool (not counted in NewMarks),
// otherwise it is counted in LostMarked at that occasion.
func CensusFromHistories(h *estimators.Histories) (Census, error) {
	if err := h.Validate(); err != nil {
		return Census{}, fmt.Errorf("census counts: %w", err)
	}
	t := h.Occasions()
	c := Census{Caught: make([]int, t), Recaptured: make([]int, t), NewMarks: make([]int, t), LostMarked: make([]int, t)}
	for i, row := range h.Caught {
		first, last := -1, -1
		for j, caught := range row {
			if caught {
				if first < 0 {
					first = j
				}
				last = j
			}
		}
		removed := h.Removed != nil && h.Removed[i]
		for j, caught := range row {
			if !caught {
				continue
			}
			c.Caught[j]++
			if j > first {
				c.Recaptured[j]++
				if removed && j == last {
					c.LostMarked[j]++
				}
			} else if !(removed && j == last) {
				c.NewMarks[j]++
			}
		}
	}
	return c, nil
}

var censusAssumptions = []string{
	"the population is closed over the whole study (no births, deaths, immigration or emigration), apart from the recorded losses on capture",
	"every animal has the same chance of capture on a given occasion; chances may differ between occasions",
	"marking does not change an animal's chance of being caught again",
	"marks are not lost, overlooked or misread",
}

// censusSums holds the sums shared by the multiple-census estimators.
type censusSums struct {
	sumCM, sumCM2, sumR, sumRM, sumR2overC float64
	used                                   int // occasions with M_t > 0 and C_t > 0
	caught                                 int // distinct animals caught: Σ U_t plus animals lost at first capture
}

func sumCensus(c Census) censusSums {
	var s censusSums
	m := c.MarkedAtLarge()
	for t := range c.Caught {
		ct, rt, mt := float64(c.Caught[t]), float64(c.Recaptured[t]), float64(m[t])
		s.sumCM += ct * mt
		s.sumCM2 += ct * mt * mt
		s.sumR += rt
		s.sumRM += rt * mt
		if ct > 0 {
			s.sumR2overC += rt * rt / ct
		}
		if mt > 0 && ct > 0 {
			s.used++
		}
		s.caught += c.Caught[t] - c.Recaptured[t]
	}
	return s
}

// Schnabel is Schnabel's (1938) multiple-census estimate in Chapman's
// (1952) "+1" form, which is less biased when recaptures are few:
//
//	N = Σ C_t M_t / (Σ R_t + 1)
//
// (Seber 1982, ch. 4). Set plusOne false for Schnabel's original
// N = Σ C_t M_t / Σ R_t.
//
// Interval: with Σ R_t < 50, Σ R_t is treated as Poisson and its exact
// limits replace Σ R_t in the formula (Chapman 1952; Seber 1982, ch. 4);
// otherwise 1/N is treated as normal with SE(1/N) = sqrt(Σ R_t)/Σ C_t M_t
// and the limits inverted. The reported SE is the delta-method
// N²·SE(1/N). No recaptures at all gives an error wrapping
// estimators.ErrNoRecaptures.
func Schnabel(c Census, plusOne bool) (*estimators.Result, error) {
	name := "Schnabel"
	if plusOne {
		name = "Schnabel (Chapman +1)"
	}
	if err := c.Validate(); err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	if len(c.Caught) < 2 {
		return nil, fmt.Errorf("%s: %w: need at least 2 occasions, have %d", name, estimators.ErrTooFewOccasions, len(c.Caught))
	}
	s := sumCensus(c)
	if s.sumR == 0 {
		return nil, fmt.Errorf("%s: %w: no marked animal was ever recaptured", name, estimators.ErrNoRecaptures)
	}
	denom := func(r float64) float64 {
		if plusOne {
			return r + 1
		}
		return r
	}
	n := s.sumCM / denom(s.sumR)
	res := &estimators.Result{
		Method:      name,
		Assumptions: append([]string(nil), censusAssumptions...),
		References: []string{
			"Schnabel, Z.E. (1938). Amer. Math. Monthly 45:348-352.",
			"Chapman, D.G. (1952). Biometrics 8:286-306.",
			"Seber, G.A.F. (1982). The Estimation of Animal Abundance, 2nd ed., ch. 4.",
		},
	}
	caught := float64(s.caught)
	seInv := math.Sqrt(s.sumR) / s.sumCM
	se := n * n * seInv
	var iv estimators.Interval
	if s.sumR < 50 { // common practice: Poisson below 50 recaptures
		lo, hi := PoissonMeanInterval(int(s.sumR))
		iv = estimators.Interval{Low: s.sumCM / denom(hi), Level: estimators.DefaultLevel, Kind: estimators.CIPoisson}
		iv.High = s.sumCM / denom(lo) // lo > 0 because sumR >= 1
	} else {
		inv := 1 / n
		iv = estimators.Interval{Level: estimators.DefaultLevel, Kind: "normal on 1/N, inverted"}
		iv.High = 1 / math.Max(inv-estimators.Z95*seInv, 1/(n*1e6))
		iv.Low = 1 / (inv + estimators.Z95*seInv)
	}
	if n < caught {
		res.Boundary = true
		res.Warnings = append(res.Warnings, fmt.Sprintf("the estimate %.1f is below the %d animals caught and is raised to that number", n, s.caught))
		n = caught
	}
	if iv.Low < caught {
		iv.Low = caught
	}
	if iv.High < n {
		iv.High = n
	}
	if s.sumR < 7 {
		res.Warnings = append(res.Warnings, fmt.Sprintf("only %.0f recaptures in all: the estimate is imprecise", s.sumR))
	}
	res.N = &estimators.Value{Estimate: n, SE: se, Interval: iv}
	res.Parameters = []estimators.Named{
		{Name: "sum C*M", Value: estimators.Value{Estimate: s.sumCM}, Identifiable: true},
		{Name: "sum R", Value: estimators.Value{Estimate: s.sumR}, Identifiable: true},
	}
	return res, nil
}

// SchumacherEschmeyer is the regression estimate of Schumacher &
// Eschmeyer (1943): the proportion marked R_t/C_t regressed through the
// origin on M_t with weights C_t, slope 1/N:
//
//	N = Σ C_t M_t² / Σ R_t M_t
//	var(1/N) = [Σ R_t²/C_t - (Σ R_t M_t)²/Σ C_t M_t²] / (s - 2) / Σ C_t M_t²
//
// with s the number of samples (Seber 1982, ch. 4; Krebs 1999, ch. 2).
// The first sample has no marked animals at large and gives no point to
// the regression, so the s - 1 points fitted through the origin with one
// slope leave s - 2 residual degrees of freedom; in general the degrees of
// freedom are (occasions with marked animals at large and a catch) - 1,
// which is s - 2 when every occasion caught something. The interval is
// 1/N ± t(df)·SE(1/N), inverted; a non-positive lower limit on 1/N leaves
// the upper limit of N unbounded, reported as a warning and capped at
// 10^6·N rather than +Inf. It needs at least two occasions with marked
// animals at large (ErrTooFewOccasions) and some recaptures
// (ErrNoRecaptures).
func SchumacherEschmeyer(c Census) (*estimators.Result, error) {
	const name = "Schumacher-Eschmeyer"
	if err := c.Validate(); err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	s := sumCensus(c)
	if s.used < 2 {
		return nil, fmt.Errorf("%s: %w: need at least 2 occasions with marked animals at large (3 samples), have %d", name, estimators.ErrTooFewOccasions, s.used)
	}
	if s.sumR == 0 || s.sumRM == 0 {
		return nil, fmt.Errorf("%s: %w: no marked animal was ever recaptured", name, estimators.ErrNoRecaptures)
	}
	n := s.sumCM2 / s.sumRM
	// One slope fitted to s.used points: s.used - 1 residual degrees of
	// freedom, Seber's s - 2 with s counting the first sample too.
	df := float64(s.used - 1)
	resid := s.sumR2overC - s.sumRM*s.sumRM/s.sumCM2
	if resid < 0 { // rounding when the points lie exactly on the line
		resid = 0
	}
	seInv := math.Sqrt(resid / df / s.sumCM2)
	res := &estimators.Result{
		Method:      name,
		Assumptions: append([]string(nil), censusAssumptions...),
		References: []string{
			"Schumacher, F.X. & Eschmeyer, R.W. (1943). J. Tenn. Acad. Sci. 18:228-249.",
			"Seber, G.A.F. (1982). The Estimation of Animal Abundance, 2nd ed., ch. 4.",
		},
	}
	tq := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: df}.Quantile(1 - (1-estimators.DefaultLevel)/2)
	inv := 1 / n
	iv := estimators.Interval{Level: estimators.DefaultLevel, Kind: "Student t on 1/N, inverted"}
	iv.Low = 1 / (inv + tq*seInv)
	if lowInv := inv - tq*seInv; lowInv > 0 {
		iv.High = 1 / lowInv
	} else {
		iv.High = n * 1e6
		res.Warnings = append(res.Warnings, "the interval for 1/N reaches zero: the upper limit of N is unbounded and shown as 10^6 times the estimate")
	}
	caught := float64(s.caught)
	if n < caught {
		res.Boundary = true
		res.Warnings = append(res.Warnings, fmt.Sprintf("the estimate %.1f is below the %d animals caught and is raised to that number", n, s.caught))
		n = caught
	}
	if iv.Low < caught {
		iv.Low = caught
	}
	if iv.High < n {
		iv.High = n
	}
	if seInv == 0 {
		res.Boundary = true
		res.Warnings = append(res.Warnings, "the proportions marked lie exactly on the regression line: the standard error is 0 and says nothing about precision")
	}
	res.N = &estimators.Value{Estimate: n, SE: n * n * seInv, Interval: iv}
	res.Parameters = []estimators.Named{
		{Name: "1/N", Value: estimators.Value{Estimate: inv, SE: seInv}, Identifiable: true},
	}
	return res, nil
}
