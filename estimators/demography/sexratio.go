package demography

import (
	"fmt"

	"tagtally/estimators"
)

// SexRatioResult is the sex ratio of the animals caught.
type SexRatioResult struct {
	Males   int `json:"males"`
	Females int `json:"females"`
	// Unknown counts animals whose sex was not recorded; they are left
	// out of the proportion and the test.
	Unknown int `json:"unknown"`
	// ProportionMale is males/(males+females) with SE sqrt(p(1-p)/n) and
	// the exact Clopper-Pearson 95% interval.
	ProportionMale estimators.Value `json:"proportion_male"`
	// MalesPerFemale is males/females; nil when no female was caught.
	MalesPerFemale *float64 `json:"males_per_female,omitempty"`
	// P is the two-sided p-value of the exact binomial test of a 1:1
	// ratio; Significant is P < 0.05.
	P           float64  `json:"p"`
	Significant bool     `json:"significant"`
	Assumptions []string `json:"assumptions"`
	Warnings    []string `json:"warnings,omitempty"`
	References  []string `json:"references"`
}

// SexRatio summarises the sexes of the animals caught: pass each animal
// once (not each capture), or recaptures of the more catchable sex will
// weigh twice. The proportion of males p = m/(m+f) gets an exact
// Clopper-Pearson interval and an exact two-sided binomial test of
// p = 0.5 (see ClopperPearson and ExactBinomialTest). Negative counts are
// ErrInvalidInput; no sexed animal at all is ErrNoData.
func SexRatio(males, females, unknown int) (*SexRatioResult, error) {
	const prefix = "sex ratio"
	if males < 0 || females < 0 || unknown < 0 {
		return nil, fmt.Errorf("%s: counts %d males, %d females, %d unknown must not be negative: %w",
			prefix, males, females, unknown, estimators.ErrInvalidInput)
	}
	n := males + females
	if n == 0 {
		return nil, fmt.Errorf("%s: %w: no animal of known sex", prefix, estimators.ErrNoData)
	}
	iv, err := ClopperPearson(males, n, estimators.DefaultLevel)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", prefix, err)
	}
	p, err := ExactBinomialTest(males, n, 0.5)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", prefix, err)
	}
	pm := float64(males) / float64(n)
	r := &SexRatioResult{
		Males: males, Females: females, Unknown: unknown,
		ProportionMale: estimators.Value{Estimate: pm, SE: sqrt(pm * (1 - pm) / float64(n)), Interval: iv},
		P:              p,
		Significant:    p < 0.05,
		Assumptions: []string{
			"Each animal is counted once, whatever the number of its captures.",
			"Males and females are equally likely to be caught; a difference in catchability shows up as a biased ratio.",
			"Sex is recorded without error.",
		},
		References: []string{
			"Clopper, C.J. & Pearson, E.S. (1934) The use of confidence or fiducial limits illustrated in the case of the binomial. Biometrika 26:404-413.",
		},
	}
	if females > 0 {
		v := float64(males) / float64(females)
		r.MalesPerFemale = &v
	}
	if unknown > 0 {
		r.Warnings = append(r.Warnings, fmt.Sprintf("%d animals of unknown sex are left out.", unknown))
	}
	if n < 10 {
		r.Warnings = append(r.Warnings, fmt.Sprintf("Only %d sexed animals: the test has little power to detect an unequal ratio.", n))
	}
	return r, nil
}
