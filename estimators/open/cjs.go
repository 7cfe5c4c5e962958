package open

import (
	"fmt"
	"math"
	"strings"

	"tagtally/estimators"
)

// Structure says how survival (phi) or capture probability (p) varies in
// a Cormack-Jolly-Seber model: the same throughout, by occasion, by group,
// or by group and occasion. Each distinct value gets its own parameter on
// the logit scale.
type Structure int

const (
	// Constant: one value for every occasion and group, written ".".
	Constant Structure = iota
	// Time: one value per interval (phi) or occasion (p), shared by the
	// groups, written "t".
	Time
	// Group: one value per group, the same on every occasion, written "g".
	Group
	// GroupTime: one value per group and occasion, written "g*t".
	GroupTime
)

// String gives the usual short notation: ".", "t", "g", "g*t".
func (s Structure) String() string {
	switch s {
	case Constant:
		return "."
	case Time:
		return "t"
	case Group:
		return "g"
	case GroupTime:
		return "g*t"
	}
	return fmt.Sprintf("Structure(%d)", int(s))
}

// ParseStructure reads the notation of String.
func ParseStructure(s string) (Structure, error) {
	for _, v := range []Structure{Constant, Time, Group, GroupTime} {
		if strings.TrimSpace(s) == v.String() {
			return v, nil
		}
	}
	return 0, fmt.Errorf("CJS: %w: unknown structure %q (want ., t, g or g*t)", estimators.ErrInvalidInput, s)
}

func (s Structure) byGroup() bool { return s == Group || s == GroupTime }
func (s Structure) byTime() bool  { return s == Time || s == GroupTime }

// ModelName is the conventional name of a CJS model, e.g. "phi(t) p(.)".
func ModelName(phi, p Structure) string {
	return fmt.Sprintf("phi(%s) p(%s)", phi, p)
}

// CJS fits the Cormack-Jolly-Seber model (Cormack 1964; Jolly 1965;
// Seber 1965) to one m-array by maximum likelihood, with survival phi and
// capture probability p each Constant or Time (use CJSGroups for group
// structures). See CJSGroups for the likelihood, parameter names and
// degenerate cases.
func CJS(m MArray, phi, p Structure) (*estimators.Result, error) {
	if phi.byGroup() || p.byGroup() {
		return nil, fmt.Errorf("CJS %s: %w: group structures need CJSGroups with one m-array per group", ModelName(phi, p), estimators.ErrInvalidInput)
	}
	return CJSGroups([]MArray{m}, nil, phi, p)
}

// CJSGroups fits a Cormack-Jolly-Seber model to one m-array per group
// (all with the same occasions) by maximum likelihood. With phi_i the
// probability of surviving from occasion i to i+1 and p_j the capture
// probability on occasion j, the m-array cell m_ij has probability
// (Burnham et al. 1987; Lebreton et al. 1992)
//
//	pi_ij = phi_i ··· phi_{j-1} · (1 - p_{i+1}) ··· (1 - p_{j-1}) · p_j
//
// and the R_i - r_i animals never seen again have probability chi_i,
// computed by chi_T = 1, chi_i = 1 - phi_i + phi_i (1 - p_{i+1}) chi_{i+1}.
// The log-likelihood, without the multinomial constant, is
//
//	ln L = Σ_g Σ_i [ Σ_j m_ij ln pi_ij + (R_i - r_i) ln chi_i ].
//
// It is rewritten once in terms of per-occasion totals of the m-array, so
// each evaluation costs O(T) per group whatever the number of animals.
// Parameters are fitted on the logit scale with estimators.Maximize and an
// analytic gradient; SEs come from the observed information and are turned
// to the probability scale by the delta method, with logit-scale 95%
// intervals.
//
// Parameters are named phi, phi[i], phi(g), phi(g)[i] (interval i to i+1)
// and p, p[j], p(g), p(g)[j] (occasion j), occasions numbered from 1.
//
// When both the last survival phi_{T-1} and the last capture probability
// p_T are free (time structures), only their product enters the
// likelihood; it is fitted as one parameter named "phi[T-1]*p[T]" and the
// two factors are reported with Identifiable false, Estimate 0 and no SE,
// so K (Result.Params) counts the product once: 2(T-1)-1 for phi(t) p(t).
// The sample size for AICc is the number of releases Σ_{i<T} R_i (common
// practice); when it is K + 1 or less AICc is undefined and Result.AICc is
// 0 with a warning.
//
// Degenerate cases: fewer than 3 occasions is ErrTooFewOccasions; no
// released animal ever caught again is ErrNoRecaptures; a parameter whose
// estimate sits at 0 or 1, or whose information matrix is singular, is
// reported with Boundary set and a warning, its SE 0 where it cannot be
// computed.
func CJSGroups(ms []MArray, groups []string, phi, p Structure) (*estimators.Result, error) {
	name := "CJS " + ModelName(phi, p)
	if len(ms) == 0 {
		return nil, fmt.Errorf("%s: %w: no m-array", name, estimators.ErrNoData)
	}
	if groups == nil && len(ms) == 1 {
		groups = []string{""}
	}
	if len(groups) != len(ms) {
		return nil, fmt.Errorf("%s: %w: %d group names for %d m-arrays", name, estimators.ErrInvalidInput, len(groups), len(ms))
	}
	if len(ms) == 1 && (phi.byGroup() || p.byGroup()) {
		return nil, fmt.Errorf("%s: %w: a group structure needs at least two groups", name, estimators.ErrInvalidInput)
	}
	if phi < Constant || phi > GroupTime || p < Constant || p > GroupTime {
		return nil, fmt.Errorf("%s: %w: unknown structure", name, estimators.ErrInvalidInput)
	}
	t := ms[0].Occasions()
	releases, recaught := 0, 0
	for g, m := range ms {
		if err := m.Validate(); err != nil {
			return nil, fmt.Errorf("%s: group %q: %w", name, groups[g], err)
		}
		if m.Occasions() != t {
			return nil, fmt.Errorf("%s: %w: group %q has %d occasions, the first group %d", name, estimators.ErrInvalidInput, groups[g], m.Occasions(), t)
		}
		for i := 0; i < t-1; i++ {
			releases += m.Released[i]
		}
		for _, r := range m.Recaptured() {
			recaught += r
		}
	}
	if t < 3 {
		return nil, fmt.Errorf("%s: %w: %d occasions, at least 3 needed", name, estimators.ErrTooFewOccasions, t)
	}
	if releases == 0 {
		return nil, fmt.Errorf("%s: %w: no animal was released before the last occasion", name, estimators.ErrNoData)
	}
	if recaught == 0 {
		return nil, fmt.Errorf("%s: %w: no released animal was caught again", name, estimators.ErrNoRecaptures)
	}
	d := newDesign(groups, t, phi, p)
	data := make([]cohortTotals, len(ms))
	for g, m := range ms {
		data[g] = totals(m)
	}
	lik := &cjsLik{d: d, data: data}
	x0 := make([]float64, d.nCoef)
	for k := range x0 {
		x0[k] = 0.5 // a start inside the range: expit(0.5) = 0.62
	}
	// The optimiser's stopping rule is an absolute gradient size, so the
	// log-likelihood is maximised per release: the work then depends on
	// the shape of the data, not on how many animals there are. The
	// log-likelihood and covariance are scaled back afterwards.
	scale := 1 / float64(releases)
	fit, err := estimators.Maximize(
		func(x []float64) float64 { return lik.logLik(x) * scale },
		func(g, x []float64) {
			lik.grad(g, x)
			for k := range g {
				g[k] *= scale
			}
		}, x0)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	fit.LogLik /= scale
	if fit.Cov != nil {
		fit.Cov.ScaleSym(scale, fit.Cov)
	}
	res := &estimators.Result{
		Method:        name,
		HasLikelihood: true,
		LogLik:        fit.LogLik,
		Params:        d.nCoef,
		SampleSize:    releases,
		Assumptions:   cjsAssumptions(),
		References:    cjsReferences(),
	}
	res.AICc = estimators.AICc(res.LogLik, res.Params, res.SampleSize)
	if math.IsInf(res.AICc, 0) {
		res.AICc = 0
		res.Warnings = append(res.Warnings, fmt.Sprintf("AICc is undefined (reported as 0): %d releases are too few for %d parameters", res.SampleSize, res.Params))
	}
	if fit.Cov == nil {
		res.Boundary = true
		res.Warnings = append(res.Warnings, "the information matrix is singular at the maximum (a parameter is at 0 or 1 or not identifiable): standard errors are not available")
	}
	for k := 0; k < d.nCoef; k++ {
		est := estimators.Expit(fit.X[k])
		se := fit.SE(k) * est * (1 - est)
		named := estimators.Named{Name: d.coefNames[k], Identifiable: true}
		named.Estimate = est
		if math.IsNaN(se) || math.IsInf(se, 0) {
			se = 0
		}
		if est < 1e-6 || est > 1-1e-6 {
			// A Wald-type SE means nothing at the edge of the range.
			res.Boundary = true
			res.Warnings = append(res.Warnings, fmt.Sprintf("%s is estimated at the boundary (%.6f): no standard error or interval is given", named.Name, est))
			se = 0
		}
		named.SE = se
		named.Interval = estimators.LogitInterval(est, se)
		if se == 0 {
			named.Interval.Kind = estimators.CINone
		}
		res.Parameters = append(res.Parameters, named)
	}
	for _, c := range d.confounded {
		res.Parameters = append(res.Parameters, estimators.Named{
			Name:         c,
			Value:        estimators.Value{Interval: estimators.Interval{Level: estimators.DefaultLevel, Kind: estimators.CINone}},
			Identifiable: false,
		})
	}
	if len(d.confounded) > 0 {
		res.Warnings = append(res.Warnings, fmt.Sprintf("%s cannot be estimated separately: only the product of the last survival and the last capture probability is identifiable (reported as a product parameter)", strings.Join(d.confounded, ", ")))
	}
	return res, nil
}

// design maps every survival and capture probability of every group to a
// logit-scale coefficient.
type design struct {
	t int
	// phiIdx[g][i] is the coefficient of phi_i (i = 0..T-2) in group g.
	phiIdx [][]int
	// pIdx[g][j] is the coefficient of p_j (j = 1..T-1; entry 0 unused),
	// or -1 when p_j is fixed at 1 because phi_{T-1}·p_T is fitted as one
	// product through phiIdx.
	pIdx      [][]int
	nCoef     int
	coefNames []string
	// confounded names the parameters replaced by a product.
	confounded []string
}

func newDesign(groups []string, t int, phiS, pS Structure) *design {
	d := &design{t: t}
	index := map[string]int{}
	coef := func(name string) int {
		if k, ok := index[name]; ok {
			return k
		}
		index[name] = len(d.coefNames)
		d.coefNames = append(d.coefNames, name)
		return index[name]
	}
	label := func(base string, s Structure, g string, occ int) string {
		if s.byGroup() {
			base += "(" + g + ")"
		}
		if s.byTime() {
			base += fmt.Sprintf("[%d]", occ)
		}
		return base
	}
	// Products first, when both last parameters vary by time: then
	// phi_{T-1} and p_T appear nowhere else, so only their product (one per
	// group pair of labels) is identifiable.
	product := phiS.byTime() && pS.byTime()
	seenConf := map[string]bool{}
	d.phiIdx = make([][]int, len(groups))
	d.pIdx = make([][]int, len(groups))
	for g, name := range groups {
		d.phiIdx[g] = make([]int, t-1)
		d.pIdx[g] = make([]int, t)
		for i := 0; i < t-1; i++ {
			if product && i == t-2 {
				continue
			}
			d.phiIdx[g][i] = coef(label("phi", phiS, name, i+1))
		}
		for j := 1; j < t; j++ {
			if product && j == t-1 {
				continue
			}
			d.pIdx[g][j] = coef(label("p", pS, name, j+1))
		}
	}
	if product {
		for g, name := range groups {
			a, b := label("phi", phiS, name, t-1), label("p", pS, name, t)
			d.phiIdx[g][t-2] = coef(a + "*" + b)
			d.pIdx[g][t-1] = -1
			for _, c := range []string{a, b} {
				if !seenConf[c] {
					seenConf[c] = true
					d.confounded = append(d.confounded, c)
				}
			}
		}
	}
	d.nCoef = len(d.coefNames)
	return d
}

// cohortTotals are the sufficient statistics of one group's m-array for
// the CJS likelihood:
//
//	Σ_ij m_ij ln pi_ij = Σ_k a_k ln phi_k + Σ_k b_k ln(1 - p_k) + Σ_j c_j ln p_j
//
// with a_k = #{m_ij: i <= k < j}, b_k = #{m_ij: i < k < j}, c_j the column
// sums, and w_i = R_i - r_i the animals never seen again.
type cohortTotals struct {
	a, b, c, w []float64
}

func totals(m MArray) cohortTotals {
	t := m.Occasions()
	ct := cohortTotals{a: make([]float64, t), b: make([]float64, t), c: make([]float64, t), w: make([]float64, t)}
	r := m.Recaptured()
	for i := 0; i < t; i++ {
		ct.w[i] = float64(m.Released[i] - r[i])
		for j := i + 1; j < t; j++ {
			v := float64(m.M[i][j])
			if v == 0 {
				continue
			}
			ct.c[j] += v
			for k := i; k < j; k++ {
				ct.a[k] += v
				if k > i {
					ct.b[k] += v
				}
			}
		}
	}
	ct.w[t-1] = 0 // released on the last occasion: no information
	return ct
}

// cjsLik evaluates the log-likelihood and its gradient on the logit
// scale. It keeps scratch buffers, so one value must not be used from two
// goroutines at once.
type cjsLik struct {
	d                 *design
	data              []cohortTotals
	phi, p, chi, gPhi []float64
	gP, psi           []float64
}

func (l *cjsLik) fill(x []float64, g int) {
	t := l.d.t
	if l.phi == nil {
		l.phi, l.p, l.chi = make([]float64, t), make([]float64, t), make([]float64, t)
		l.gPhi, l.gP, l.psi = make([]float64, t), make([]float64, t), make([]float64, t)
	}
	for i := 0; i < t-1; i++ {
		l.phi[i] = estimators.Expit(x[l.d.phiIdx[g][i]])
	}
	for j := 1; j < t; j++ {
		if k := l.d.pIdx[g][j]; k >= 0 {
			l.p[j] = estimators.Expit(x[k])
		} else {
			l.p[j] = 1
		}
	}
	l.chi[t-1] = 1
	for i := t - 2; i >= 0; i-- {
		l.chi[i] = 1 - l.phi[i] + l.phi[i]*(1-l.p[i+1])*l.chi[i+1]
	}
}

// xlogy is x·ln y with 0·ln 0 = 0.
func xlogy(x, y float64) float64 {
	if x == 0 {
		return 0
	}
	return x * math.Log(y)
}

func (l *cjsLik) logLik(x []float64) float64 {
	t := l.d.t
	ll := 0.0
	for g, ct := range l.data {
		l.fill(x, g)
		for k := 0; k < t-1; k++ {
			ll += xlogy(ct.a[k], l.phi[k]) + xlogy(ct.w[k], l.chi[k])
		}
		for j := 1; j < t; j++ {
			ll += xlogy(ct.c[j], l.p[j])
			if j < t-1 {
				ll += xlogy(ct.b[j], 1-l.p[j])
			}
		}
	}
	if math.IsNaN(ll) {
		return math.Inf(-1)
	}
	return ll
}

// grad is the analytic gradient. For the chi terms the adjoint
// psi_i = w_i/chi_i + psi_{i-1} phi_{i-1} (1 - p_i) collects every
// cohort's sensitivity, so that
//
//	d/dphi_k    = a_k/phi_k + psi_k (-1 + (1 - p_{k+1}) chi_{k+1})
//	d/dp_{k+1}  = c_{k+1}/p_{k+1} - b_{k+1}/(1 - p_{k+1}) - psi_k phi_k chi_{k+1}
//
// and the chain rule through expit adds the factor theta(1 - theta).
func (l *cjsLik) grad(gr, x []float64) {
	t := l.d.t
	for k := range gr {
		gr[k] = 0
	}
	for g, ct := range l.data {
		l.fill(x, g)
		prev := 0.0
		for i := 0; i < t-1; i++ {
			psi := 0.0
			if ct.w[i] > 0 {
				psi = ct.w[i] / l.chi[i]
			}
			if i > 0 {
				psi += prev * l.phi[i-1] * (1 - l.p[i])
			}
			l.psi[i] = psi
			prev = psi
		}
		for k := 0; k < t-1; k++ {
			ph, q := l.phi[k], 1-l.p[k+1]
			dphi := l.psi[k] * (-1 + q*l.chi[k+1])
			if ct.a[k] > 0 {
				dphi += ct.a[k] / ph
			}
			gr[l.d.phiIdx[g][k]] += dphi * ph * (1 - ph)
			if c := l.d.pIdx[g][k+1]; c >= 0 {
				pp := l.p[k+1]
				dp := -l.psi[k] * ph * l.chi[k+1]
				if ct.c[k+1] > 0 {
					dp += ct.c[k+1] / pp
				}
				if k+1 < t-1 && ct.b[k+1] > 0 {
					dp -= ct.b[k+1] / q
				}
				gr[c] += dp * pp * (1 - pp)
			}
		}
	}
}

func cjsAssumptions() []string {
	return []string{
		"Every marked animal alive at an occasion has the same capture probability (within its group).",
		"Every marked animal alive after an occasion has the same probability of surviving to the next (within its group); survival is apparent: death and permanent emigration are not told apart.",
		"Marks are not lost, overlooked or misread, and the fates of animals are independent.",
		"Sampling is instantaneous relative to the interval between occasions; animals lost on capture are left out of the releases.",
		"The model is conditional on release: it says nothing about unmarked animals or population size.",
	}
}

func cjsReferences() []string {
	return []string{
		"Cormack, R. M. (1964). Estimates of survival from the sighting of marked animals. Biometrika 51: 429-438.",
		"Jolly, G. M. (1965). Explicit estimates from capture-recapture data with both death and immigration-stochastic model. Biometrika 52: 225-247.",
		"Seber, G. A. F. (1965). A note on the multiple-recapture census. Biometrika 52: 249-259.",
		"Burnham, K. P., Anderson, D. R., White, G. C., Brownie, C. & Pollock, K. H. (1987). Design and analysis methods for fish survival experiments based on release-recapture. American Fisheries Society Monograph 5.",
		"Lebreton, J.-D., Burnham, K. P., Clobert, J. & Anderson, D. R. (1992). Modeling survival and testing biological hypotheses using marked animals. Ecological Monographs 62: 67-118.",
		"Burnham, K. P. & Anderson, D. R. (2002). Model Selection and Multimodel Inference, 2nd ed. Springer.",
	}
}
