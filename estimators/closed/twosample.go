package closed

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"

	"tagtally/estimators"
)

// TwoSample holds the counts of a two-sample (Petersen) experiment.
type TwoSample struct {
	// M is the number of animals caught, marked and released in the first
	// sample.
	M int `json:"M"`
	// C is the number of animals caught in the second sample.
	C int `json:"C"`
	// R is the number of animals in the second sample that carried a mark.
	R int `json:"R"`
	// LostFirst is the number of animals caught in the first sample and
	// not released (loss on capture). They are not in M; the estimate of
	// the population left after the first sample is raised by LostFirst so
	// that N refers to the population at the first sample (Seber 1982,
	// ch. 3).
	LostFirst int `json:"lost_first,omitempty"`
}

// Caught is the number of distinct animals seen in the two samples,
// M + LostFirst + C - R, the floor for any estimate of N.
func (s TwoSample) Caught() int { return s.M + s.LostFirst + s.C - s.R }

// Validate checks that the counts are non-negative and consistent.
func (s TwoSample) Validate() error {
	switch {
	case s.M < 0 || s.C < 0 || s.R < 0 || s.LostFirst < 0:
		return fmt.Errorf("two-sample counts: %w: negative count (M=%d, C=%d, R=%d, lost=%d)", estimators.ErrInvalidInput, s.M, s.C, s.R, s.LostFirst)
	case s.M == 0 && s.C == 0:
		return fmt.Errorf("two-sample counts: %w: nothing was caught", estimators.ErrNoData)
	case s.M == 0:
		return fmt.Errorf("two-sample counts: %w: no animals were marked in the first sample", estimators.ErrNoData)
	case s.C == 0:
		return fmt.Errorf("two-sample counts: %w: the second sample is empty", estimators.ErrNoData)
	case s.R > s.M:
		return fmt.Errorf("two-sample counts: %w: %d recaptures but only %d marked", estimators.ErrInvalidInput, s.R, s.M)
	case s.R > s.C:
		return fmt.Errorf("two-sample counts: %w: %d recaptures in a second sample of %d", estimators.ErrInvalidInput, s.R, s.C)
	}
	return nil
}

// TwoSampleFromHistories derives two-sample counts from capture histories
// with exactly two occasions. Animals lost on capture at the first occasion
// (Removed, with no capture at the second) are not counted in M, since they
// were never released to be recaptured; they are counted in LostFirst.
func TwoSampleFromHistories(h *estimators.Histories) (TwoSample, error) {
	if err := h.Validate(); err != nil {
		return TwoSample{}, fmt.Errorf("two-sample counts: %w", err)
	}
	if t := h.Occasions(); t != 2 {
		return TwoSample{}, fmt.Errorf("two-sample counts: %w: need exactly 2 occasions, have %d", estimators.ErrTooFewOccasions, t)
	}
	var s TwoSample
	for i, row := range h.Caught {
		lostFirst := h.Removed != nil && h.Removed[i] && row[0] && !row[1]
		switch {
		case lostFirst:
			s.LostFirst++
		case row[0]:
			s.M++
		}
		if row[1] {
			s.C++
			if row[0] {
				s.R++
			}
		}
	}
	return s, nil
}

// TwoSampleCI chooses the confidence interval of a two-sample estimate.
type TwoSampleCI int

const (
	// TwoSampleCIAuto applies the usual rule of thumb (common practice,
	// following the discussion in Seber 1982, ch. 3): binomial when
	// more than a tenth of the second sample was marked (R/C > 0.1),
	// otherwise Poisson when R < 50, otherwise normal.
	TwoSampleCIAuto TwoSampleCI = iota
	// TwoSampleCINormal is estimate ± 1.96 SE.
	TwoSampleCINormal
	// TwoSampleCIPoisson treats R as Poisson: exact (Garwood) limits for its
	// mean, put through the estimator in place of R (Chapman 1948; Seber
	// 1982, ch. 3).
	TwoSampleCIPoisson
	// TwoSampleCIBinomial treats R/C as a binomial proportion: exact
	// Clopper-Pearson limits for the marked fraction p = M/N, put through
	// the estimator in place of R/C (Seber 1982, ch. 3).
	TwoSampleCIBinomial
)

// pickTwoSampleCI resolves TwoSampleCIAuto.
func pickTwoSampleCI(s TwoSample, ci TwoSampleCI) TwoSampleCI {
	if ci != TwoSampleCIAuto {
		return ci
	}
	switch {
	case float64(s.R)/float64(s.C) > 0.1: // common practice
		return TwoSampleCIBinomial
	case s.R < 50: // common practice
		return TwoSampleCIPoisson
	default:
		return TwoSampleCINormal
	}
}

// PoissonMeanInterval returns the exact two-sided 95% limits for the mean
// of a Poisson count x (Garwood 1936):
//
//	low = χ²(0.025; 2x)/2 (0 when x = 0),  high = χ²(0.975; 2x+2)/2.
func PoissonMeanInterval(x int) (low, high float64) {
	a := (1 - estimators.DefaultLevel) / 2
	if x > 0 {
		low = distuv.ChiSquared{K: 2 * float64(x)}.Quantile(a) / 2
	}
	high = distuv.ChiSquared{K: 2*float64(x) + 2}.Quantile(1-a) / 2
	return low, high
}

// BinomialProportionInterval returns the exact (Clopper-Pearson 1934)
// two-sided 95% limits for a binomial proportion with x successes in n
// trials: Beta(α/2; x, n-x+1) and Beta(1-α/2; x+1, n-x), with 0 and 1 at
// the edges.
func BinomialProportionInterval(x, n int) (low, high float64) {
	a := (1 - estimators.DefaultLevel) / 2
	low, high = 0, 1
	if x > 0 {
		low = distuv.Beta{Alpha: float64(x), Beta: float64(n - x + 1)}.Quantile(a)
	}
	if x < n {
		high = distuv.Beta{Alpha: float64(x + 1), Beta: float64(n - x)}.Quantile(1 - a)
	}
	return low, high
}

// twoSampleMethod describes one two-sample estimator as a function of the
// recapture count, so that interval limits on R carry through it.
type twoSampleMethod struct {
	name string
	// n is N-hat as a function of a (possibly non-integer) recapture count.
	n func(s TwoSample, r float64) float64
	// variance of N-hat at the observed counts.
	variance func(s TwoSample) float64
	refs     []string
	// minR is the smallest R at which the estimate is finite.
	minR int
}

var (
	lincolnPetersen = twoSampleMethod{
		name: "Lincoln-Petersen",
		n: func(s TwoSample, r float64) float64 {
			return float64(s.M) * float64(s.C) / r
		},
		// Seber (1982, ch. 3): var = M² C (C - R) / R³.
		variance: func(s TwoSample) float64 {
			m, c, r := float64(s.M), float64(s.C), float64(s.R)
			return m * m * c * (c - r) / (r * r * r)
		},
		refs: []string{"Petersen, C.G.J. (1896). Rep. Dan. Biol. Stn 6:1-48.", "Lincoln, F.C. (1930). US Dept Agric. Circ. 118.", "Seber, G.A.F. (1982). The Estimation of Animal Abundance, 2nd ed., ch. 3."},
		minR: 1,
	}
	chapman = twoSampleMethod{
		name: "Chapman",
		n: func(s TwoSample, r float64) float64 {
			return (float64(s.M)+1)*(float64(s.C)+1)/(r+1) - 1
		},
		// Seber (1970; 1982, ch. 3): var = (M+1)(C+1)(M-R)(C-R) / ((R+1)²(R+2)).
		variance: func(s TwoSample) float64 {
			m, c, r := float64(s.M), float64(s.C), float64(s.R)
			return (m + 1) * (c + 1) * (m - r) * (c - r) / ((r + 1) * (r + 1) * (r + 2))
		},
		refs: []string{"Chapman, D.G. (1951). Univ. Calif. Publ. Stat. 1:131-160.", "Seber, G.A.F. (1970). Biometrika 57:313-318.", "Seber, G.A.F. (1982). The Estimation of Animal Abundance, 2nd ed., ch. 3."},
		minR: 1,
	}
	bailey = twoSampleMethod{
		name: "Bailey",
		n: func(s TwoSample, r float64) float64 {
			return float64(s.M) * (float64(s.C) + 1) / (r + 1)
		},
		// Bailey (1951, 1952): var = M² (C+1)(C-R) / ((R+1)²(R+2)).
		variance: func(s TwoSample) float64 {
			m, c, r := float64(s.M), float64(s.C), float64(s.R)
			return m * m * (c + 1) * (c - r) / ((r + 1) * (r + 1) * (r + 2))
		},
		refs: []string{"Bailey, N.T.J. (1951). Biometrika 38:293-306.", "Bailey, N.T.J. (1952). J. Anim. Ecol. 21:120-127.", "Seber, G.A.F. (1982). The Estimation of Animal Abundance, 2nd ed., ch. 3."},
		minR: 1,
	}
)

var twoSampleAssumptions = []string{
	"the population is closed between the two samples (no births, deaths, immigration or emigration)",
	"marks are not lost, overlooked or misread",
	"marking does not change an animal's chance of being caught in the second sample",
	"every animal has the same chance of being caught in the second sample (or marked animals mix fully with unmarked ones)",
}

// LincolnPetersen is the Petersen estimate N = M·C/R with Seber's (1982,
// ch. 3) variance M²C(C-R)/R³. It is biased upwards when R is small;
// prefer Chapman. R = 0 gives an error wrapping estimators.ErrNoRecaptures.
func LincolnPetersen(s TwoSample, ci TwoSampleCI) (*estimators.Result, error) {
	return twoSampleEstimate(lincolnPetersen, s, ci)
}

// Chapman is Chapman's (1951) bias-corrected Petersen estimate
//
//	N = (M+1)(C+1)/(R+1) - 1
//
// which is exactly unbiased when M + C >= N (sampling without
// replacement), with Seber's (1970) variance
//
//	var = (M+1)(C+1)(M-R)(C-R) / ((R+1)²(R+2)).
//
// R = 0 gives an error wrapping estimators.ErrNoRecaptures: the formula is
// finite there but says nothing about N.
func Chapman(s TwoSample, ci TwoSampleCI) (*estimators.Result, error) {
	return twoSampleEstimate(chapman, s, ci)
}

// Bailey is Bailey's (1951, 1952) binomial-sampling form, for a second
// sample taken with replacement (animals released at once and able to be
// counted again):
//
//	N = M(C+1)/(R+1),  var = M²(C+1)(C-R) / ((R+1)²(R+2)).
//
// When every marked animal was recaptured the estimate can fall below the
// number caught; it is then raised to that floor and flagged as a
// boundary estimate.
func Bailey(s TwoSample, ci TwoSampleCI) (*estimators.Result, error) {
	return twoSampleEstimate(bailey, s, ci)
}

func twoSampleEstimate(m twoSampleMethod, s TwoSample, ci TwoSampleCI) (*estimators.Result, error) {
	if err := s.Validate(); err != nil {
		return nil, fmt.Errorf("%s: %w", m.name, err)
	}
	if s.R < m.minR {
		return nil, fmt.Errorf("%s: %w: none of the %d animals in the second sample was marked", m.name, estimators.ErrNoRecaptures, s.C)
	}
	caught := float64(s.Caught())
	res := &estimators.Result{
		Method:      m.name,
		Assumptions: append([]string(nil), twoSampleAssumptions...),
		References:  append([]string(nil), m.refs...),
	}
	n := m.n(s, float64(s.R))
	v := m.variance(s)
	if v < 0 || math.IsNaN(v) {
		v = 0
	}
	// Before losses are added back, the floor is the animals seen alive
	// after the first sample: M + C - R.
	if seen := float64(s.M + s.C - s.R); n < seen {
		res.Boundary = true
		res.Warnings = append(res.Warnings, fmt.Sprintf("the estimate %.1f is below the %d animals caught and is raised to that number", n, s.M+s.C-s.R))
		n = seen
	}
	se := math.Sqrt(v)
	if se == 0 {
		res.Boundary = true
		res.Warnings = append(res.Warnings, "every marked animal was recaptured or every animal in the second sample was marked: the standard error is 0 and says nothing about precision")
	}
	if s.R < 7 { // Seber (1982, ch. 3): bias is small when R >= 7.
		res.Warnings = append(res.Warnings, fmt.Sprintf("only %d recaptures: the estimate may be noticeably biased (Seber 1982 suggests R >= 7)", s.R))
	}
	kind := pickTwoSampleCI(s, ci)
	var iv estimators.Interval
	switch kind {
	case TwoSampleCINormal:
		iv = estimators.NormalInterval(n, se)
	case TwoSampleCIPoisson:
		lo, hi := PoissonMeanInterval(s.R)
		// R >= 1 here, so lo > 0 and the upper limit is finite.
		iv = estimators.Interval{Low: m.n(s, hi), High: m.n(s, lo), Level: estimators.DefaultLevel, Kind: estimators.CIPoisson}
	case TwoSampleCIBinomial:
		lo, hi := BinomialProportionInterval(s.R, s.C)
		c := float64(s.C)
		iv = estimators.Interval{Low: m.n(s, hi*c), High: m.n(s, lo*c), Level: estimators.DefaultLevel, Kind: estimators.CIBinomial}
	default:
		return nil, fmt.Errorf("%s: %w: unknown interval choice %d", m.name, estimators.ErrInvalidInput, ci)
	}
	if lost := float64(s.LostFirst); lost > 0 {
		// The formulas estimate the animals at large after the first
		// sample; the animals removed then are added back.
		n += lost
		iv.Low += lost
		iv.High += lost
		res.Warnings = append(res.Warnings, fmt.Sprintf("%d animals lost on capture in the first sample are added to the estimate", s.LostFirst))
	}
	if iv.Low < caught {
		iv.Low = caught
	}
	if iv.High < n {
		iv.High = n
	}
	res.N = &estimators.Value{Estimate: n, SE: se, Interval: iv}
	res.Parameters = []estimators.Named{
		{Name: "M", Value: estimators.Value{Estimate: float64(s.M)}, Identifiable: true},
		{Name: "C", Value: estimators.Value{Estimate: float64(s.C)}, Identifiable: true},
		{Name: "R", Value: estimators.Value{Estimate: float64(s.R)}, Identifiable: true},
	}
	return res, nil
}
