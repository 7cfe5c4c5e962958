package estimators

import (
	"errors"
	"math"
)

// Errors for data that cannot support an estimate. Estimators wrap them with
// a prefix that says which method and why, so callers can test with
// errors.Is and still show the wrapped message to a person.
var (
	// ErrNoData: there are no animals, no occasions or no counts at all.
	ErrNoData = errors.New("no data")
	// ErrNoRecaptures: nothing was caught twice, so N is not identifiable.
	ErrNoRecaptures = errors.New("N is not identifiable: no recaptures")
	// ErrTooFewOccasions: the method needs more sampling occasions.
	ErrTooFewOccasions = errors.New("too few occasions")
	// ErrInvalidInput: negative counts, inconsistent lengths, values out of range.
	ErrInvalidInput = errors.New("invalid input")
	// ErrNotConverged: the optimiser did not reach a maximum.
	ErrNotConverged = errors.New("the likelihood fit did not converge")
)

// CI kinds, named in words a reader of a report understands.
const (
	CINormal      = "normal (estimate ± 1.96 SE)"
	CILogNormal   = "log-normal, lower bound at least the number caught (Chao 1987)"
	CIProfile     = "profile likelihood"
	CILogit       = "logit-scale normal"
	CIPoisson     = "Poisson on the recapture count"
	CIBinomial    = "binomial on the recapture proportion"
	CIExact       = "exact (Clopper-Pearson)"
	CINone        = "not available"
	DefaultLevel  = 0.95
	zFor95Percent = 1.959963984540054
)

// Z95 is the standard normal quantile for a two-sided 95% interval.
const Z95 = zFor95Percent

// Interval is a confidence interval and the way it was built.
type Interval struct {
	Low   float64 `json:"ci_low"`
	High  float64 `json:"ci_high"`
	Level float64 `json:"ci_level"`
	Kind  string  `json:"ci_kind"`
}

// Value is one estimated quantity with its standard error and interval.
// SE is NaN-free: a quantity whose SE cannot be computed has SE 0 and a
// note in the owning result's Warnings.
type Value struct {
	Estimate float64 `json:"estimate"`
	SE       float64 `json:"se"`
	Interval
}

// Named is a named parameter estimate, e.g. "p[3]" or "phi(female)".
type Named struct {
	Name string `json:"name"`
	Value
	// Identifiable is false for parameters the data cannot separate, such as
	// the last survival and capture probability of a fully time-dependent
	// Cormack-Jolly-Seber model, whose product alone is estimable.
	Identifiable bool `json:"identifiable"`
}

// Result is what every estimator returns.
type Result struct {
	// Method is the published name of the method or model, e.g. "Chapman",
	// "Mth", "CJS phi(t) p(.)".
	Method string `json:"method"`
	// N is the abundance estimate where the method gives one.
	N *Value `json:"N,omitempty"`
	// Parameters holds everything else the method estimates.
	Parameters []Named `json:"parameters,omitempty"`
	// Likelihood-based methods fill these; HasLikelihood says whether they
	// mean anything.
	HasLikelihood bool    `json:"has_likelihood"`
	LogLik        float64 `json:"loglik,omitempty"`
	// Params is the number of estimated parameters K used by AICc,
	// counting only identifiable ones.
	Params int     `json:"params,omitempty"`
	AICc   float64 `json:"aicc,omitempty"`
	// SampleSize is the effective sample size used in AICc.
	SampleSize int `json:"sample_size,omitempty"`
	// Boundary is true when an estimate sits on the edge of its range
	// (e.g. N equal to the number caught, p = 1); the estimate is reported
	// but should be read with care. Warnings says why.
	Boundary bool `json:"boundary,omitempty"`
	// Assumptions in plain words.
	Assumptions []string `json:"assumptions"`
	// Warnings about this data set (small counts, boundary estimates,
	// non-identifiable parameters).
	Warnings []string `json:"warnings,omitempty"`
	// References to the published method.
	References []string `json:"references,omitempty"`
}

// Param returns the named parameter and whether it exists.
func (r *Result) Param(name string) (Named, bool) {
	for _, p := range r.Parameters {
		if p.Name == name {
			return p, true
		}
	}
	return Named{}, false
}

// AICc is Akaike's information criterion with the small-sample correction
// (Hurvich & Tsai 1989; Burnham & Anderson 2002, eq. 2.2):
//
//	AICc = -2 lnL + 2K + 2K(K+1)/(n-K-1)
//
// When n-K-1 <= 0 the correction is undefined and +Inf is returned so the
// model sorts last rather than silently winning.
func AICc(logLik float64, k, n int) float64 {
	if n-k-1 <= 0 {
		return math.Inf(1)
	}
	kf, nf := float64(k), float64(n)
	return -2*logLik + 2*kf + 2*kf*(kf+1)/(nf-kf-1)
}

// NormalInterval is estimate ± z·SE at the 95% level.
func NormalInterval(est, se float64) Interval {
	return Interval{Low: est - Z95*se, High: est + Z95*se, Level: DefaultLevel, Kind: CINormal}
}

// LogitInterval builds a 95% interval for a probability on the logit scale
// from its estimate and SE (delta method), which keeps the bounds in (0,1)
// (e.g. Lebreton et al. 1992). At 0 or 1 the interval collapses to the point.
func LogitInterval(p, se float64) Interval {
	iv := Interval{Low: p, High: p, Level: DefaultLevel, Kind: CILogit}
	if p <= 0 || p >= 1 || se <= 0 || math.IsNaN(se) {
		return iv
	}
	lg := math.Log(p / (1 - p))
	seLogit := se / (p * (1 - p))
	iv.Low = 1 / (1 + math.Exp(-(lg - Z95*seLogit)))
	iv.High = 1 / (1 + math.Exp(-(lg + Z95*seLogit)))
	return iv
}

// LogNormalIntervalN is the log-normal interval for an abundance estimate of
// Chao (1987, eq. 13), whose lower bound is never below the number of
// distinct animals caught, Mt1:
//
//	f0 = N - Mt1, C = exp(1.96 sqrt(ln(1 + var/f0^2)))
//	interval = (Mt1 + f0/C, Mt1 + f0·C)
//
// When f0 <= 0 (every animal believed seen) the interval is (Mt1, Mt1).
func LogNormalIntervalN(n, se float64, caught int) Interval {
	mt1 := float64(caught)
	f0 := n - mt1
	iv := Interval{Low: mt1, High: mt1, Level: DefaultLevel, Kind: CILogNormal}
	if f0 <= 0 || se <= 0 || math.IsNaN(se) {
		if f0 > 0 {
			iv.Low, iv.High = n, n
		}
		return iv
	}
	c := math.Exp(Z95 * math.Sqrt(math.Log(1+se*se/(f0*f0))))
	iv.Low = mt1 + f0/c
	iv.High = mt1 + f0*c
	return iv
}
