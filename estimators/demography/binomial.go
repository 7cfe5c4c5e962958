package demography

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"

	"tagtally/estimators"
)

// ClopperPearson is the exact two-sided interval for a binomial
// proportion with x successes in n trials at the given level (e.g. 0.95)
// (Clopper & Pearson 1934):
//
//	low  = B(α/2; x, n-x+1)      (0 when x = 0)
//	high = B(1-α/2; x+1, n-x)    (1 when x = n)
//
// where B(q; a, b) is the q quantile of the beta distribution and
// α = 1 - level. It is conservative: coverage is at least the level.
// n must be positive and 0 ≤ x ≤ n.
func ClopperPearson(x, n int, level float64) (estimators.Interval, error) {
	if n <= 0 || x < 0 || x > n {
		return estimators.Interval{}, fmt.Errorf("exact binomial interval: %d successes in %d trials: %w", x, n, estimators.ErrInvalidInput)
	}
	if !(level > 0 && level < 1) {
		return estimators.Interval{}, fmt.Errorf("exact binomial interval: level %v is not between 0 and 1: %w", level, estimators.ErrInvalidInput)
	}
	a := 1 - level
	iv := estimators.Interval{Low: 0, High: 1, Level: level, Kind: estimators.CIExact}
	if x > 0 {
		iv.Low = distuv.Beta{Alpha: float64(x), Beta: float64(n - x + 1)}.Quantile(a / 2)
	}
	if x < n {
		iv.High = distuv.Beta{Alpha: float64(x + 1), Beta: float64(n - x)}.Quantile(1 - a/2)
	}
	return iv, nil
}

// ExactBinomialTest is the two-sided p-value of the exact test that x
// successes in n trials come from a binomial with success probability
// p0: the total probability of every outcome no more likely than the one
// observed (the usual exact two-sided rule, which orders outcomes by
// their probability under p0). A relative tolerance of 1e-7 treats outcomes as equally likely
// when their probabilities differ only by rounding. For p0 = 0.5 it equals
// twice the smaller tail, capped at 1.
func ExactBinomialTest(x, n int, p0 float64) (float64, error) {
	if n <= 0 || x < 0 || x > n {
		return 0, fmt.Errorf("exact binomial test: %d successes in %d trials: %w", x, n, estimators.ErrInvalidInput)
	}
	if !(p0 > 0 && p0 < 1) {
		return 0, fmt.Errorf("exact binomial test: null proportion %v is not between 0 and 1: %w", p0, estimators.ErrInvalidInput)
	}
	b := distuv.Binomial{N: float64(n), P: p0}
	lx := b.LogProb(float64(x))
	limit := lx + math.Log1p(1e-7)
	p := 0.0
	for k := 0; k <= n; k++ {
		if lk := b.LogProb(float64(k)); lk <= limit {
			p += math.Exp(lk)
		}
	}
	return math.Min(1, p), nil
}

// sqrt is math.Sqrt that returns 0 for non-positive input, so an SE of
// a proportion at 0 or 1 is 0 rather than NaN from rounding.
func sqrt(x float64) float64 {
	if x <= 0 {
		return 0
	}
	return math.Sqrt(x)
}
