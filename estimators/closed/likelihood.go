package closed

// Shared machinery for the full-likelihood closed-population models of
// Otis et al. (1978) and Pledger (2000): sufficient statistics taken once
// from the capture histories, the N part of the likelihood, the fit and the
// assembly of a Result.
//
// Conventions kept by every model in this file set:
//
//   - N enters through f0 = N − Mt1 (animals never caught), worked on the
//     log scale, s = ln f0, so the optimiser needs no bound and N >= Mt1.
//     N is continuous: the combinatorial term N!/(N−Mt1)! of the
//     likelihoods of Otis et al. (1978) and Pledger (2000) is written
//     lnΓ(N+1) − lnΓ(N−Mt1+1).
//   - Probabilities are on the logit scale.
//   - LogLik is the log-likelihood of the observed individual capture
//     histories, lnL = lnΓ(N+1) − lnΓ(N−Mt1+1) + Σ_ω n_ω ln π_ω
//     + (N−Mt1) ln π_0, WITHOUT the multinomial constant −Σ_ω ln n_ω!
//     (n_ω animals with history ω). The constant depends only on the data,
//     so leaving it out of every model keeps AICc differences right.
//     Frequency-based models (Mh) use the same individual-history
//     likelihood (no binomial coefficients C(t,k)), so M0, Mt, Mb, Mh, Mth
//     and Mtb are comparable by AICc. The Huggins conditional likelihood is
//     a different likelihood and is not comparable with them.
//   - SampleSize for AICc is Mt1, the number of distinct animals caught:
//     each animal's capture history is one independent multinomial
//     outcome. Burnham & Anderson (2002) discuss how the effective sample
//     size is chosen and that it is not always clear-cut; t·Mt1 (one
//     Bernoulli trial per animal and occasion) is the other choice seen in
//     practice. Mt1 is the more conservative (a larger small-sample
//     penalty). Where n − K − 1 <= 0 AICc is undefined: Result.AICc is
//     then 0 (left out of JSON) with a warning.

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"

	"gonum.org/v1/gonum/diff/fd"
	"gonum.org/v1/gonum/mathext"
	"gonum.org/v1/gonum/optimize"

	"tagtally/estimators"
)

// chiSq1At95 is the 95% quantile of the chi-square distribution with one
// degree of freedom (1.959964²), the cut-off of a profile-likelihood
// interval.
const chiSq1At95 = 3.841458820694124

// captureStats are the sufficient statistics of a capture-history matrix.
// Every full-likelihood model reads only these, so the cost of a likelihood
// evaluation grows with the number of occasions (and, for Mth, the number
// of distinct histories), not with the number of animals.
type captureStats struct {
	t   int // occasions
	mt1 int // distinct animals caught, Mt1

	total  float64 // all captures, n.
	trials float64 // occasions at which caught animals were available (t each unless removed)

	n        []float64 // n_j, captures on occasion j
	u        []float64 // u_j, first captures on occasion j
	m        []float64 // m_j, recaptures on occasion j
	before   []float64 // M_j, distinct animals caught before occasion j (M_1 = 0)
	marked   []float64 // marked animals alive and available at j: M_j minus those removed before j
	avail    []float64 // caught animals available at j: Mt1 minus those removed before j
	removed  int       // animals lost on capture
	freq     []freqCell
	patterns []pattern // distinct (history, removed) rows with counts

	maxCaptures int // the largest number of captures of one animal
}

// freqCell is the number of animals caught k times out of T occasions at
// which they were available (T = t unless removed), the statistic of Mh.
type freqCell struct {
	k, trials int
	count     float64
}

// pattern is one distinct capture history with its loss-on-capture flag
// and the number of animals that share it, the statistic of Mth.
type pattern struct {
	caught []bool
	last   int // index of the last capture
	lost   bool
	count  float64
}

// availableAt reports whether an animal with this pattern could be caught
// on occasion j: always, unless it was lost on an earlier capture.
func (p *pattern) availableAt(j int) bool { return !p.lost || j <= p.last }

// summarise validates the histories and computes the sufficient statistics.
// minOccasions is the fewest occasions the calling model needs.
func summarise(method string, h *estimators.Histories, minOccasions int) (*captureStats, error) {
	if err := h.Validate(); err != nil {
		return nil, fmt.Errorf("closed %s: %w", method, err)
	}
	t := h.Occasions()
	if t < minOccasions {
		return nil, fmt.Errorf("closed %s: %w: %d occasions, the model needs at least %d", method, estimators.ErrTooFewOccasions, t, minOccasions)
	}
	st := &captureStats{
		t: t, mt1: h.Animals(),
		n: make([]float64, t), u: make([]float64, t), m: make([]float64, t),
		before: make([]float64, t), marked: make([]float64, t), avail: make([]float64, t),
	}
	removedBefore := make([]float64, t+1) // animals lost at an occasion < j
	freq := map[[2]int]float64{}
	pat := map[string]int{}
	key := make([]byte, t+1)
	for i, row := range h.Caught {
		first, last, k := -1, -1, 0
		for j, c := range row {
			if c {
				if first < 0 {
					first = j
				}
				last = j
				k++
			}
		}
		lost := h.Removed != nil && h.Removed[i]
		trials := t
		if lost {
			trials = last + 1
			removedBefore[last+1]++
			st.removed++
		}
		st.trials += float64(trials)
		st.total += float64(k)
		st.u[first]++
		for j, c := range row {
			if c {
				st.n[j]++
				if j != first {
					st.m[j]++
				}
			}
		}
		if k > st.maxCaptures {
			st.maxCaptures = k
		}
		freq[[2]int{k, trials}]++
		for j, c := range row {
			key[j] = '0'
			if c {
				key[j] = '1'
			}
		}
		key[t] = '.'
		if lost {
			key[t] = 'x'
		}
		if idx, ok := pat[string(key)]; ok {
			st.patterns[idx].count++
		} else {
			pat[string(key)] = len(st.patterns)
			st.patterns = append(st.patterns, pattern{caught: append([]bool(nil), row...), last: last, lost: lost, count: 1})
		}
	}
	gone := 0.0
	for j := 0; j < t; j++ {
		gone += removedBefore[j]
		if j > 0 {
			st.before[j] = st.before[j-1] + st.u[j-1]
		}
		st.marked[j] = st.before[j] - gone
		st.avail[j] = float64(st.mt1) - gone
	}
	for kt, c := range freq {
		st.freq = append(st.freq, freqCell{k: kt[0], trials: kt[1], count: c})
	}
	// A fixed order keeps sums, and so fits, identical from run to run.
	sort.Slice(st.freq, func(a, b int) bool {
		if st.freq[a].k != st.freq[b].k {
			return st.freq[a].k < st.freq[b].k
		}
		return st.freq[a].trials < st.freq[b].trials
	})
	if st.maxCaptures < 2 {
		return nil, fmt.Errorf("closed %s: %w: each of the %d animals was caught only once", method, estimators.ErrNoRecaptures, st.mt1)
	}
	return st, nil
}

// allCaughtEveryTime reports whether every animal was caught on every
// occasion at which it was available: then every capture probability is 1
// and N = Mt1 sits on the boundary of its range.
func (st *captureStats) allCaughtEveryTime() bool { return st.total == st.trials }

// nTerm is lnΓ(N+1) − lnΓ(N−Mt1+1) with N = Mt1 + f0.
func nTerm(mt1 int, f0 float64) float64 {
	a, _ := math.Lgamma(float64(mt1) + f0 + 1)
	b, _ := math.Lgamma(f0 + 1)
	return a - b
}

// nTermDf0 is the derivative of nTerm with respect to f0:
// ψ(N+1) − ψ(f0+1).
func nTermDf0(mt1 int, f0 float64) float64 {
	return mathext.Digamma(float64(mt1)+f0+1) - mathext.Digamma(f0+1)
}

// binLL is s ln p + f ln(1−p) with p = expit(eta), written so that it stays
// finite for large |eta| and treats 0·ln 0 as 0.
func binLL(s, f, eta float64) float64 {
	// ln p = −ln(1+e^−η), ln(1−p) = −ln(1+e^η)
	v := 0.0
	if s != 0 {
		v -= s * softplus(-eta)
	}
	if f != 0 {
		v -= f * softplus(eta)
	}
	return v
}

// softplus is ln(1 + e^x) without overflow.
func softplus(x float64) float64 {
	if x > 35 {
		return x
	}
	if x < -35 {
		return math.Exp(x)
	}
	return math.Log1p(math.Exp(x))
}

// xlogy is x ln y with 0 ln 0 = 0.
func xlogy(x, y float64) float64 {
	if x == 0 {
		return 0
	}
	return x * math.Log(y)
}

// maxF0 is the largest number of uncaught animals we accept as an
// estimate: a hundred times the animals caught, plus 1000. A maximum
// beyond it (or a likelihood still rising there) means the data do not
// bound N under the model in any useful way, and the fit reports that as
// an error instead of an absurd number. The profile interval is searched
// up to the same limit.
func maxF0(mt1 int) float64 { return 100*float64(mt1) + 1000 }

// model is one full-likelihood model on the working scale
// x = (ln f0, other parameters...).
type model struct {
	method string
	st     *captureStats
	ll     func(x []float64) float64
	grad   func(g, x []float64) // analytic gradient of ll, or nil
	// profile maximises ll over x[1:] with f0 fixed, starting from warm;
	// it returns the maximum and the maximiser (x[1:]).
	profile func(f0 float64, warm []float64) (float64, []float64, error)
	// params turns the working parameters and their covariance into named
	// estimates on the natural scale (the N entry excluded).
	// cov(i, j) is the working-scale covariance, 0 when unavailable.
	params      func(x []float64, cov func(i, j int) float64) []estimators.Named
	k           int
	assumptions []string
	references  []string
}

var (
	refOtis     = "Otis, D.L., Burnham, K.P., White, G.C. & Anderson, D.R. (1978) Statistical inference from capture data on closed animal populations. Wildlife Monographs 62."
	refPledger  = "Pledger, S. (2000) Unified maximum likelihood estimates for closed capture-recapture models using mixtures. Biometrics 56:434-442."
	refHuggins  = "Huggins, R.M. (1989) On the statistical analysis of capture experiments. Biometrika 76:133-140."
	refVenzon   = "Venzon, D.J. & Moolgavkar, S.H. (1988) A method for computing profile-likelihood-based confidence intervals. Applied Statistics 37:87-94."
	refDarroch  = "Darroch, J.N. (1958) The multiple-recapture census I: estimation of a closed population. Biometrika 45:343-359."
	assumeClose = "The population is closed: no births, deaths, immigration or emigration between the first and last occasion (apart from animals recorded as lost on capture)."
	assumeMarks = "Marks are not lost, overlooked or misread, and each animal is identified correctly."
	assumeIndep = "Animals are caught independently of one another."
)

// fitModel maximises the model from each starting point, keeps the best
// maximum (mixture likelihoods can have several) and assembles the Result:
// N with the delta-method SE from the observed information and the
// profile-likelihood interval, natural-scale parameters, log-likelihood, K
// and AICc. When every animal was caught every time it returns the
// boundary result without fitting.
func fitModel(m *model, starts [][]float64, err error) (*estimators.Result, error) {
	if err != nil {
		return nil, err
	}
	if m.st.allCaughtEveryTime() {
		return m.boundaryAllCaught(), nil
	}
	best, err := bestFit(m, starts)
	if err != nil {
		return nil, err
	}
	return m.result(best)
}

// bestFit maximises from every start and returns the highest maximum.
// With several starts, each is first climbed with gonum's BFGS alone (no
// information matrix), and only the best point is handed to
// estimators.Maximize, which converges at once there and adds the observed
// information: one finite-difference Hessian instead of one per start.
func bestFit(m *model, starts [][]float64) (*estimators.Fit, error) {
	scale := float64(m.st.mt1)
	from := starts[0]
	if len(starts) > 1 {
		bestV := math.Inf(-1)
		for _, x0 := range starts {
			x, v, err := climb(m.ll, m.grad, x0, scale)
			if err == nil && v > bestV {
				from, bestV = x, v
			}
		}
	}
	f, err := maximizeScaled(m.ll, m.grad, from, scale)
	if err != nil {
		return nil, wrapMethod(m.method, err)
	}
	return f, nil
}

// climb maximises ll from x0 with gonum's BFGS on lnL/scale, returning the
// point reached and lnL there, or an error when nothing finite was found.
func climb(ll func([]float64) float64, grad func(g, x []float64), x0 []float64, scale float64) ([]float64, float64, error) {
	negLL := func(x []float64) float64 {
		v := ll(x)
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return math.Inf(1)
		}
		return -v / scale
	}
	var g func(g, x []float64)
	if grad != nil {
		g = func(gr, x []float64) {
			grad(gr, x)
			for i := range gr {
				gr[i] /= -scale
			}
		}
	} else {
		g = func(gr, x []float64) { fd.Gradient(gr, negLL, x, &fd.Settings{Formula: fd.Central}) }
	}
	res, err := optimize.Minimize(optimize.Problem{Func: negLL, Grad: g}, append([]float64(nil), x0...),
		&optimize.Settings{GradientThreshold: 1e-6, MajorIterations: 2000}, &optimize.BFGS{})
	if res == nil || math.IsInf(res.F, 0) || math.IsNaN(res.F) {
		return nil, 0, fmt.Errorf("%w: %v", estimators.ErrNotConverged, err)
	}
	return res.X, -res.F * scale, nil
}

// maximizeScaled runs estimators.Maximize on lnL/scale (and its gradient)
// and undoes the scaling in the returned fit. Dividing by the number of
// animals makes the optimiser's absolute gradient threshold mean the same
// for 50 animals as for 50,000; without it a sum over thousands of animals
// never meets the threshold to rounding error and the slower fallback runs.
func maximizeScaled(ll func(x []float64) float64, grad func(g, x []float64), x0 []float64, scale float64) (*estimators.Fit, error) {
	if !(scale > 0) {
		scale = 1
	}
	sll := func(x []float64) float64 { return ll(x) / scale }
	var sgrad func(g, x []float64)
	if grad != nil {
		sgrad = func(g, x []float64) {
			grad(g, x)
			for i := range g {
				g[i] /= scale
			}
		}
	}
	f, err := estimators.Maximize(sll, sgrad, x0)
	if err != nil {
		return nil, err
	}
	f.LogLik = ll(f.X)
	if f.Cov != nil {
		f.Cov.ScaleSym(1/scale, f.Cov)
	}
	return f, nil
}

// result builds the Result from a finished fit.
func (m *model) result(f *estimators.Fit) (*estimators.Result, error) {
	st := m.st
	if math.IsNaN(f.LogLik) || math.IsInf(f.LogLik, 0) {
		return nil, fmt.Errorf("closed %s: %w: the log-likelihood is not finite at the optimum", m.method, estimators.ErrNotConverged)
	}
	f0 := math.Exp(f.X[0])
	if f0 > maxF0(st.mt1) || math.IsInf(f0, 0) {
		return nil, fmt.Errorf("closed %s: %w: the likelihood keeps increasing as N grows (N above %.3g), so these data do not bound N under this model", m.method, estimators.ErrNotConverged, float64(st.mt1)+maxF0(st.mt1))
	}
	if m.profile != nil {
		// A maximum inside the range can still be a local one when the
		// likelihood rises again towards large N.
		if v, _, err := m.profile(maxF0(st.mt1), f.X[1:]); err == nil && v > f.LogLik+1e-6 {
			return nil, fmt.Errorf("closed %s: %w: the likelihood is higher at N = %.0f than at the local maximum N = %.1f, so these data do not bound N under this model", m.method, estimators.ErrNotConverged, float64(st.mt1)+maxF0(st.mt1), float64(st.mt1)+f0)
		}
	}
	mt1 := float64(st.mt1)
	res := &estimators.Result{
		Method:        m.method,
		HasLikelihood: true,
		LogLik:        f.LogLik,
		Params:        m.k,
		SampleSize:    st.mt1,
		Assumptions:   m.assumptions,
		References:    m.references,
	}
	res.AICc = finiteAICc(res.LogLik, res.Params, res.SampleSize)
	seN := 0.0
	if s := f.SE(0); !math.IsNaN(s) {
		seN = f0 * s // delta method: dN/ds = e^s = f0
	} else {
		res.Warnings = append(res.Warnings, "the observed information matrix is singular or not positive definite at the optimum, so standard errors are not available (some parameter is not identifiable from these data or sits on a boundary)")
	}
	ci, warn := profileInterval(m, f.X, f.LogLik)
	res.Warnings = append(res.Warnings, warn...)
	res.N = &estimators.Value{Estimate: mt1 + f0, SE: seN, Interval: ci}
	if f0 < 1e-3 {
		res.Boundary = true
		res.Warnings = append(res.Warnings, "N is estimated at its lower bound, the number of animals caught (Mt1): the data suggest nearly every animal was caught")
	}
	res.Parameters = m.params(f.X, func(i, j int) float64 {
		if f.Cov == nil {
			return 0
		}
		return f.Cov.At(i, j)
	})
	for _, p := range res.Parameters {
		if p.Estimate > 1-1e-6 || (p.Estimate < 1e-6 && p.Estimate >= 0) {
			if isProbabilityName(p.Name) {
				res.Boundary = true
				res.Warnings = append(res.Warnings, fmt.Sprintf("%s is estimated at the edge of its range (%.3g)", p.Name, p.Estimate))
			}
		}
	}
	if res.AICc == 0 {
		res.Warnings = append(res.Warnings, fmt.Sprintf("AICc is undefined: %d parameters for %d animals caught", res.Params, res.SampleSize))
	}
	return res, nil
}

// isProbabilityName reports whether a parameter name is a probability
// (capture, recapture or class proportion: "p", "c", "p[3]", "c[2]",
// "p(class 1, ...)", "proportion in class 1") rather than an effect on the
// logit scale.
func isProbabilityName(name string) bool {
	if name == "p" || name == "c" {
		return true
	}
	for _, prefix := range []string{"p[", "c[", "p(", "proportion"} {
		if strings.HasPrefix(name, prefix) {
			return true
		}
	}
	return false
}

// boundaryAllCaught is the result when every animal was caught every time
// it could be: N = Mt1 with every probability 1. The likelihood is then
// maximised at the boundary (lnL = 0) and no standard error exists.
func (m *model) boundaryAllCaught() *estimators.Result {
	mt1 := float64(m.st.mt1)
	res := &estimators.Result{
		Method:        m.method,
		N:             &estimators.Value{Estimate: mt1, Interval: estimators.Interval{Low: mt1, High: mt1, Level: estimators.DefaultLevel, Kind: estimators.CIProfile}},
		HasLikelihood: true,
		LogLik:        0,
		Params:        m.k,
		SampleSize:    m.st.mt1,
		Boundary:      true,
		Assumptions:   m.assumptions,
		References:    m.references,
		Warnings:      []string{"every animal was caught on every occasion it could be, so N is estimated as the number caught (Mt1) with every capture probability 1; this is a boundary estimate without a standard error"},
	}
	res.AICc = finiteAICc(0, m.k, m.st.mt1)
	return res
}

// probParam is a probability estimated on the logit scale eta with
// variance varEta, reported with a delta-method SE and a logit-scale
// interval.
func probParam(name string, eta, varEta float64) estimators.Named {
	seEta := math.Sqrt(math.Max(varEta, 0))
	p := estimators.Expit(eta)
	se := p * (1 - p) * seEta
	v := estimators.Value{Estimate: p, SE: se, Interval: estimators.LogitInterval(p, se)}
	return estimators.Named{Name: name, Value: v, Identifiable: true}
}

// effectParam is an effect on the logit scale with variance v and a
// normal interval.
func effectParam(name string, b, v float64) estimators.Named {
	se := math.Sqrt(math.Max(v, 0))
	return estimators.Named{Name: name, Value: estimators.Value{Estimate: b, SE: se, Interval: estimators.NormalInterval(b, se)}, Identifiable: true}
}

// occasionName is "p[j]" with j counted from 1.
func occasionName(prefix string, j int) string { return prefix + "[" + strconv.Itoa(j+1) + "]" }

// startF0 is a starting value for f0 from the M0 estimating equation of
// Otis et al. (1978): Mt1 = N (1 − (1 − n./(tN))^t), solved by bisection
// on N (a stable one-dimensional root, not an optimisation).
func startF0(st *captureStats) float64 {
	mt1 := float64(st.mt1)
	tf := float64(st.t)
	g := func(n float64) float64 { return n*(1-math.Pow(1-st.total/(tf*n), tf)) - mt1 }
	lo, hi := mt1+1e-9, mt1+1
	// g < 0 at N = Mt1 and g -> n. − Mt1 > 0 as N grows.
	for g(hi) < 0 && hi < mt1+maxF0(st.mt1) {
		hi = mt1 + 2*(hi-mt1)
	}
	if g(hi) < 0 {
		return maxF0(st.mt1)
	}
	for i := 0; i < 60; i++ {
		mid := (lo + hi) / 2
		if g(mid) < 0 {
			lo = mid
		} else {
			hi = mid
		}
	}
	f0 := (lo+hi)/2 - mt1
	if f0 < 0.5 {
		f0 = 0.5
	}
	return f0
}

// wrapMethod prefixes an error with the method's name.
func wrapMethod(method string, err error) error { return fmt.Errorf("closed %s: %w", method, err) }

// finiteAICc is estimators.AICc, except that where AICc is undefined
// (n − K − 1 <= 0, where estimators.AICc gives +Inf) it returns 0, which
// the Result's JSON leaves out ("aicc" is omitempty) and which a reader
// must not take as a value; the fit adds a warning. estimators.Select
// recomputes the criterion from LogLik, Params and SampleSize, so model
// ranking still sees +Inf.
func finiteAICc(lnL float64, k, n int) float64 {
	v := estimators.AICc(lnL, k, n)
	if math.IsInf(v, 0) || math.IsNaN(v) {
		return 0
	}
	return v
}
