package spatial

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"

	"tagtally/estimators"
)

// Pattern is the reading of a dispersion test in words.
type Pattern string

// The three readings. Clumped: more animals together than chance would
// put there; uniform: more evenly spread than chance; random: the test
// cannot tell the pattern from a Poisson scatter.
const (
	Clumped Pattern = "clumped"
	Random  Pattern = "random"
	Uniform Pattern = "uniform"
)

// SignificanceLevel is the two-sided level of every test in this package.
const SignificanceLevel = 0.05

// Test is a significance test of departure from a random (Poisson)
// pattern, read in words.
type Test struct {
	// Name says which statistic, e.g. "chi-square", "z".
	Name      string  `json:"name"`
	Statistic float64 `json:"statistic"`
	// DF is the degrees of freedom of a chi-square statistic (0 for z).
	DF int `json:"df,omitempty"`
	// P is the two-sided p-value.
	P float64 `json:"p"`
	// Significant is P < SignificanceLevel.
	Significant bool `json:"significant"`
	// Pattern is Random unless the test is significant, then Clumped or
	// Uniform by the direction of the departure.
	Pattern Pattern `json:"pattern"`
}

func chiSquareTest(stat float64, df int, clumpedWhenHigh bool) Test {
	c := distuv.ChiSquared{K: float64(df)}
	lower := c.CDF(stat)
	upper := c.Survival(stat)
	p := math.Min(1, 2*math.Min(lower, upper))
	t := Test{Name: "chi-square", Statistic: stat, DF: df, P: p, Significant: p < SignificanceLevel, Pattern: Random}
	if t.Significant {
		if (upper < lower) == clumpedWhenHigh {
			t.Pattern = Clumped
		} else {
			t.Pattern = Uniform
		}
	}
	return t
}

func checkCounts(prefix string, counts []int) (n int, total float64, err error) {
	if len(counts) < 2 {
		return 0, 0, fmt.Errorf("%s: %w: need counts from at least 2 stations, got %d", prefix, estimators.ErrNoData, len(counts))
	}
	for i, c := range counts {
		if c < 0 {
			return 0, 0, fmt.Errorf("%s: station %d has a negative count %d: %w", prefix, i, c, estimators.ErrInvalidInput)
		}
		total += float64(c)
	}
	return len(counts), total, nil
}

// VarianceMean is the variance-to-mean ratio of counts per station with
// its index-of-dispersion test.
type VarianceMean struct {
	Stations int     `json:"stations"`
	Total    int     `json:"total"`
	Mean     float64 `json:"mean"`
	// Variance is the sample variance with divisor n-1.
	Variance float64 `json:"variance"`
	// Ratio is Variance/Mean: 1 for a Poisson scatter, above 1 clumped,
	// below 1 uniform.
	Ratio float64 `json:"ratio"`
	// Test is the index of dispersion (n-1)·s²/mean referred to
	// chi-square with n-1 degrees of freedom.
	Test Test `json:"test"`
}

// VarianceToMean computes the variance-to-mean ratio of counts per
// station and its index-of-dispersion test (Fisher,
// Thornton & Mackenzie 1922; Blackman 1942; Krebs 1999, ch. 6):
//
//	ID = (n-1) s² / mean  ~  chi-square with n-1 df under a Poisson scatter
//
// The p-value is two-sided; a significant low ID reads uniform, a high one
// clumped. Degenerate cases: fewer than 2 stations or no animals at all is
// ErrNoData; a negative count ErrInvalidInput. Equal counts everywhere
// give ratio 0, the most uniform possible.
func VarianceToMean(counts []int) (*VarianceMean, error) {
	const prefix = "variance-to-mean ratio"
	n, total, err := checkCounts(prefix, counts)
	if err != nil {
		return nil, err
	}
	if total == 0 {
		return nil, fmt.Errorf("%s: %w: every count is 0", prefix, estimators.ErrNoData)
	}
	mean := total / float64(n)
	ss := 0.0
	for _, c := range counts {
		d := float64(c) - mean
		ss += d * d
	}
	v := ss / float64(n-1)
	r := &VarianceMean{Stations: n, Total: int(total), Mean: mean, Variance: v, Ratio: v / mean}
	r.Test = chiSquareTest(ss/mean, n-1, true)
	return r, nil
}

// MorisitaResult is Morisita's index with its test and its standardized
// form.
type MorisitaResult struct {
	Stations int `json:"stations"`
	Total    int `json:"total"`
	// Index is Morisita's I_d: 1 random, above 1 clumped (at most n, all
	// animals at one station), below 1 uniform.
	Index float64 `json:"index"`
	// Test is Morisita's chi-square I_d(ΣX-1) + n - ΣX with n-1 df
	// (numerically the same statistic as the index of dispersion).
	Test Test `json:"test"`
	// F is Morisita's (1962) F0 = chi-square/(n-1) on (n-1, ∞) df.
	F float64 `json:"f"`
	// UniformIndex M_u and ClumpedIndex M_c are the values of I_d at the
	// lower and upper 2.5% points of that chi-square.
	UniformIndex float64 `json:"uniform_index"`
	ClumpedIndex float64 `json:"clumped_index"`
	// Standardized is I_p of Smith-Gill (1975), from -1 to +1, with ±0.5
	// the 95% limits of a random pattern.
	Standardized float64 `json:"standardized"`
	// StandardizedPattern reads I_p: clumped above 0.5, uniform below
	// -0.5, otherwise random; StandardizedSignificant says it is outside
	// ±0.5.
	StandardizedPattern     Pattern  `json:"standardized_pattern"`
	StandardizedSignificant bool     `json:"standardized_significant"`
	Warnings                []string `json:"warnings,omitempty"`
}

// Morisita computes Morisita's (1959, 1962) index of dispersion for counts
// x_i over n stations,
//
//	I_d = n (Σx² - Σx) / ((Σx)² - Σx)
//
// its chi-square test χ² = I_d(Σx - 1) + n - Σx on n-1 df (two-sided), and
// the standardized Morisita index I_p of Smith-Gill (1975) as given by
// Krebs (1999, chapter 6):
//
//	M_u = (χ²_{0.025} - n + Σx) / (Σx - 1)     uniform index
//	M_c = (χ²_{0.975} - n + Σx) / (Σx - 1)     clumped index
//	I_d ≥ M_c > 1:  I_p = 0.5 + 0.5 (I_d - M_c)/(n - M_c)
//	M_c > I_d ≥ 1:  I_p = 0.5 (I_d - 1)/(M_c - 1)
//	1 > I_d > M_u:  I_p = -0.5 (I_d - 1)/(M_u - 1)
//	1 > M_u ≥ I_d:  I_p = -0.5 + 0.5 (I_d - M_u)/M_u
//
// where χ²_q is the q quantile of chi-square with n-1 df. Fewer than two
// stations or fewer than two animals in all leave I_d undefined
// (ErrNoData). When M_u ≤ 0, which happens with very few animals per
// station, the uniform branch cannot reach -0.5 and a warning says so.
func Morisita(counts []int) (*MorisitaResult, error) {
	const prefix = "Morisita's index"
	n, total, err := checkCounts(prefix, counts)
	if err != nil {
		return nil, err
	}
	if total < 2 {
		return nil, fmt.Errorf("%s: %w: needs at least 2 animals in all, got %v", prefix, estimators.ErrNoData, total)
	}
	nf := float64(n)
	ss := 0.0
	for _, c := range counts {
		ss += float64(c) * float64(c)
	}
	id := nf * (ss - total) / (total*total - total)
	chi := id*(total-1) + nf - total
	if chi < 0 { // rounding only; the statistic is a sum of squares
		chi = 0
	}
	r := &MorisitaResult{Stations: n, Total: int(total), Index: id, F: chi / (nf - 1)}
	r.Test = chiSquareTest(chi, n-1, true)
	c := distuv.ChiSquared{K: nf - 1}
	mu := (c.Quantile(0.025) - nf + total) / (total - 1)
	mc := (c.Quantile(0.975) - nf + total) / (total - 1)
	r.UniformIndex, r.ClumpedIndex = mu, mc
	var ip float64
	switch {
	case id >= mc:
		ip = 0.5 + 0.5*(id-mc)/(nf-mc)
	case id >= 1:
		ip = 0.5 * (id - 1) / (mc - 1)
	case id > mu:
		ip = -0.5 * (id - 1) / (mu - 1)
	case mu > 0:
		ip = -0.5 + 0.5*(id-mu)/mu
	default:
		// id <= mu <= 0 leaves only id = mu = 0: the uniform limit.
		ip = -0.5
	}
	if mu <= 0 {
		r.Warnings = append(r.Warnings, "Too few animals per station for the standardized index to show a significant uniform pattern (the uniform index is not above 0).")
	}
	if mc >= nf {
		// Id can never exceed n; a clumped index at or above n means the
		// data cannot show significant clumping and the first branch's
		// denominator would vanish.
		r.Warnings = append(r.Warnings, "Too few stations for the standardized index to show a significant clumped pattern (the clumped index is not below the number of stations).")
		if id >= mc {
			ip = 0.5
		}
	}
	r.Standardized = math.Max(-1, math.Min(1, ip))
	r.StandardizedPattern = Random
	if r.Standardized > 0.5 {
		r.StandardizedPattern, r.StandardizedSignificant = Clumped, true
	} else if r.Standardized < -0.5 {
		r.StandardizedPattern, r.StandardizedSignificant = Uniform, true
	}
	return r, nil
}

// DispersionResult gathers the indices for one set of station counts.
type DispersionResult struct {
	VarianceMean *VarianceMean   `json:"variance_mean"`
	Morisita     *MorisitaResult `json:"morisita"`
	Assumptions  []string        `json:"assumptions"`
	References   []string        `json:"references"`
}

// Dispersion computes the variance-to-mean ratio and Morisita's indices
// for counts per station (see VarianceToMean and Morisita). Include every
// station that was operated, with its zeros. Count distinct animals per
// station over the period (an animal caught at two stations counts at
// each) or captures per station; animals are the units the indices
// assume, and captures, which repeat the same animals, exaggerate
// clumping. Stations with unequal effort should not be pooled.
func Dispersion(counts []int) (*DispersionResult, error) {
	vm, err := VarianceToMean(counts)
	if err != nil {
		return nil, err
	}
	mo, err := Morisita(counts)
	if err != nil {
		return nil, err
	}
	return &DispersionResult{
		VarianceMean: vm,
		Morisita:     mo,
		Assumptions: []string{
			"Stations sample equal areas with equal effort; a station that ran fewer nights or covered less ground looks uniform or clumped for that reason alone.",
			"Counts describe where animals were caught, which mixes where they live with how traps attract them.",
			"The random (Poisson) pattern is the reference; the tests are two-sided at the 5% level.",
		},
		References: []string{
			"Morisita, M. (1959) Measuring of the dispersion of individuals and analysis of the distributional patterns. Memoirs of the Faculty of Science, Kyushu University, Series E (Biology) 2:215-235.",
			"Morisita, M. (1962) Iδ-index, a measure of dispersion of individuals. Researches on Population Ecology 4:1-7.",
			"Smith-Gill, S.J. (1975) Cytophysiological basis of disruptive pigmentary patterns in the leopard frog Rana pipiens. II. Wild type and mutant cell-specific patterns. Journal of Morphology 146:35-54.",
			"Krebs, C.J. (1999) Ecological Methodology, 2nd ed. Addison-Wesley, chapter 6.",
		},
	}, nil
}
