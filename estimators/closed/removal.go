package closed

import (
	"errors"
	"fmt"
	"math"

	"tagtally/estimators"
)

// ErrNoDepletion: the catches of a removal experiment do not fall off
// enough from pass to pass for N to be estimated.
var ErrNoDepletion = errors.New("N is not identifiable: catches do not decline across removal passes")

var removalAssumptions = []string{
	"the population is closed apart from the removals (no births, deaths, immigration or emigration during the passes)",
	"every animal has the same chance of capture, and that chance is the same on every pass (equal effort per pass)",
	"caught animals are not returned before the last pass",
}

// removalSums returns T = Σ c_i and X = Σ (i-1) c_i after checking the
// catches.
func removalSums(name string, catches []int) (t, x float64, err error) {
	if len(catches) == 0 {
		return 0, 0, fmt.Errorf("%s: %w: no passes", name, estimators.ErrNoData)
	}
	if len(catches) < 2 {
		return 0, 0, fmt.Errorf("%s: %w: need at least 2 passes, have 1", name, estimators.ErrTooFewOccasions)
	}
	for i, c := range catches {
		if c < 0 {
			return 0, 0, fmt.Errorf("%s: %w: pass %d has a negative catch (%d)", name, estimators.ErrInvalidInput, i+1, c)
		}
		t += float64(c)
		x += float64(i * c)
	}
	if t == 0 {
		return 0, 0, fmt.Errorf("%s: %w: nothing was caught", name, estimators.ErrNoData)
	}
	return t, x, nil
}

// ZippinVariance is the large-sample variance of a removal estimate of N
// with k passes and capture probability p, q = 1-p (Zippin 1956; Seber
// 1982, ch. 7):
//
//	var(N) = N q^k (1-q^k) / [ (1-q^k)² - (k p)² q^(k-1) ].
//
// It returns +Inf when the denominator is not positive (no depletion).
func ZippinVariance(n, p float64, k int) float64 {
	q := 1 - p
	qk := math.Pow(q, float64(k))
	den := (1-qk)*(1-qk) - float64(k*k)*p*p*math.Pow(q, float64(k-1))
	if den <= 0 {
		return math.Inf(1)
	}
	return n * qk * (1 - qk) / den
}

// zippinPVariance is the large-sample variance of p (Zippin 1956; Seber
// 1982, ch. 7): var(p) = (q p)² (1-q^k) / (N [ q (1-q^k)² - (k p)² q^k ]).
func zippinPVariance(n, p float64, k int) float64 {
	q := 1 - p
	qk := math.Pow(q, float64(k))
	den := n * (q*(1-qk)*(1-qk) - float64(k*k)*p*p*qk)
	if den <= 0 {
		return math.Inf(1)
	}
	return (q * p) * (q * p) * (1 - qk) / den
}

// Zippin is the maximum-likelihood removal estimate of Zippin (1956, 1958)
// from the catches c_1..c_k of k passes of equal effort, animals removed
// as they are caught. With T = Σ c_i and X = Σ (i-1) c_i, q = 1-p solves
//
//	q/p - k q^k / (1 - q^k) = X / T
//
// and N = T / (1 - q^k). The left side rises from 0 to (k-1)/2 as q goes
// from 0 to 1, so a solution exists only when X/T < (k-1)/2, that is when
// the catches decline on average; otherwise the error wraps
// ErrNoDepletion. Everything caught on the first pass (X = 0) gives N = T
// as a boundary estimate. The variance is ZippinVariance and the interval
// normal with its lower limit raised to T.
func Zippin(catches []int) (*estimators.Result, error) {
	const name = "Zippin removal"
	t, x, err := removalSums(name, catches)
	if err != nil {
		return nil, err
	}
	k := len(catches)
	res := &estimators.Result{
		Method:      name,
		Assumptions: append([]string(nil), removalAssumptions...),
		References: []string{
			"Zippin, C. (1956). Biometrics 12:163-189.",
			"Zippin, C. (1958). J. Wildl. Manage. 22:82-90.",
			"Seber, G.A.F. (1982). The Estimation of Animal Abundance, 2nd ed., ch. 7.",
		},
	}
	if x == 0 {
		return removalBoundary(res, catches, t, "every animal was caught on the first pass"), nil
	}
	ratio := x / t
	if ratio >= float64(k-1)/2 {
		return nil, fmt.Errorf("%s: %w (X/T = %.3f, needs to be below %.1f)", name, ErrNoDepletion, ratio, float64(k-1)/2)
	}
	kf := float64(k)
	h := func(q float64) float64 {
		qk := math.Pow(q, kf)
		return q/(1-q) - kf*qk/(1-qk) - ratio
	}
	lo, hi := 1e-12, 1-1e-12
	if h(hi) <= 0 {
		return nil, fmt.Errorf("%s: %w (X/T = %.3f is too close to %.1f)", name, ErrNoDepletion, ratio, float64(k-1)/2)
	}
	for i := 0; i < 200 && hi-lo > 1e-15; i++ {
		mid := (lo + hi) / 2
		if h(mid) > 0 {
			hi = mid
		} else {
			lo = mid
		}
	}
	q := (lo + hi) / 2
	p := 1 - q
	n := t / (1 - math.Pow(q, kf))
	return removalFinish(res, catches, t, n, p), nil
}

// CarleStrub is the weighted removal estimate of Carle & Strub (1978): N
// maximises the likelihood of Zippin's model integrated over p with a
// uniform (Beta(1,1)) weight, which always exists and is more stable for
// small catches. With X' = Σ (k-i) c_i, N is the smallest integer N >= T
// with
//
//	(N+1)/(N-T+1) · Π_{i=1..k} (kN - X' - T + 1 + k - i)/(kN - X' + 2 + k - i) <= 1,
//
// and p = T/(kN - X'). The variance is Zippin's (ZippinVariance) at these
// values, as Carle & Strub recommend; when it is undefined (catches that do
// not decline) the SE is 0 and a warning says the interval is not
// available. Catches that rise so steeply that no N up to 10^7 satisfies
// the condition give an error wrapping ErrNoDepletion.
func CarleStrub(catches []int) (*estimators.Result, error) {
	const name = "Carle-Strub removal"
	t, _, err := removalSums(name, catches)
	if err != nil {
		return nil, err
	}
	k := len(catches)
	xc := 0.0 // Carle & Strub's X' = Σ (k-i) c_i, i from 1
	for i, c := range catches {
		xc += float64((k - 1 - i) * c)
	}
	res := &estimators.Result{
		Method:      name,
		Assumptions: append([]string(nil), removalAssumptions...),
		References: []string{
			"Carle, F.L. & Strub, M.R. (1978). Biometrics 34:621-630.",
			"Zippin, C. (1956). Biometrics 12:163-189.",
		},
	}
	kf := float64(k)
	criterion := func(n float64) float64 {
		v := (n + 1) / (n - t + 1)
		for i := 1; i <= k; i++ {
			fi := float64(i)
			v *= (kf*n - xc - t + 1 + kf - fi) / (kf*n - xc + 2 + kf - fi)
		}
		return v
	}
	const limit = 1e7
	var n float64
	for n = t; n <= limit; n++ {
		if criterion(n) <= 1 {
			break
		}
	}
	if n > limit {
		return nil, fmt.Errorf("%s: %w: no estimate below %.0g", name, ErrNoDepletion, float64(limit))
	}
	if n == t && catchesAllFirst(catches) {
		return removalBoundary(res, catches, t, "every animal was caught on the first pass"), nil
	}
	p := t / (kf*n - xc)
	return removalFinish(res, catches, t, n, p), nil
}

func catchesAllFirst(c []int) bool {
	for _, v := range c[1:] {
		if v != 0 {
			return false
		}
	}
	return true
}

func removalBoundary(res *estimators.Result, catches []int, t float64, why string) *estimators.Result {
	res.Boundary = true
	res.Warnings = append(res.Warnings, why+": N equals the number removed and its standard error is 0")
	res.N = &estimators.Value{Estimate: t, Interval: estimators.Interval{Low: t, High: t, Level: estimators.DefaultLevel, Kind: estimators.CINone}}
	res.Parameters = []estimators.Named{{Name: "p", Value: estimators.Value{Estimate: 1, Interval: estimators.Interval{Low: 1, High: 1, Level: estimators.DefaultLevel, Kind: estimators.CINone}}, Identifiable: true}}
	return res
}

func removalFinish(res *estimators.Result, catches []int, t, n, p float64) *estimators.Result {
	k := len(catches)
	v := ZippinVariance(n, p, k)
	var iv estimators.Interval
	se := 0.0
	if math.IsInf(v, 1) || math.IsNaN(v) {
		res.Warnings = append(res.Warnings, "the catches barely decline: Zippin's variance is undefined, so no interval is given")
		iv = estimators.Interval{Low: t, High: n, Level: estimators.DefaultLevel, Kind: estimators.CINone}
		if n < t {
			iv.High = t
		}
	} else {
		se = math.Sqrt(v)
		iv = estimators.NormalInterval(n, se)
	}
	if iv.Low < t {
		iv.Low = t
	}
	if n < t { // cannot happen for these estimators; kept as a floor
		n = t
		res.Boundary = true
	}
	res.N = &estimators.Value{Estimate: n, SE: se, Interval: iv}
	pv := zippinPVariance(n, p, k)
	pse := 0.0
	if !math.IsInf(pv, 1) && !math.IsNaN(pv) {
		pse = math.Sqrt(pv)
	}
	res.Parameters = []estimators.Named{{Name: "p", Value: estimators.Value{Estimate: p, SE: pse, Interval: estimators.LogitInterval(p, pse)}, Identifiable: true}}
	if p < 0.2 {
		res.Warnings = append(res.Warnings, fmt.Sprintf("capture probability per pass is low (%.2f): removal estimates are then imprecise and biased low if catchability falls between passes", p))
	}
	return res
}
