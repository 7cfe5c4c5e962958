package open

import (
	"fmt"
	"math"
	"strings"

	"gonum.org/v1/gonum/diff/fd"
	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/mathext"

	"tagtally/estimators"
)

// JSMLOccasion is the likelihood Jolly-Seber estimate for one occasion.
// Every field is filled; Identifiable is false for values that exist only
// through the constraints described on JollySeberML.
type JSMLOccasion struct {
	// Occasion is numbered from 1.
	Occasion int `json:"occasion"`
	// N is the expected number alive in the study population at the
	// occasion (before sampling).
	N estimators.Named `json:"N"`
	// P is the capture probability at the occasion.
	P estimators.Named `json:"p"`
	// Phi is the probability of surviving (and staying) from this occasion
	// to the next; nil on the last occasion.
	Phi *estimators.Named `json:"phi,omitempty"`
	// B is the expected number of animals that entered between this
	// occasion and the next and were alive at the next ("net births");
	// nil on the last occasion.
	B *estimators.Named `json:"B,omitempty"`
	// Entry is the entry share b: the share of the superpopulation that
	// entered between this occasion and the next; nil on the last occasion.
	// The share present at occasion 1 is parameter "b[0]" of Result.
	Entry *estimators.Named `json:"b,omitempty"`
}

// JSMLResult is one fitted Jolly-Seber likelihood model.
type JSMLResult struct {
	// Result carries the model name, log-likelihood, parameter count,
	// AICc, the superpopulation size as N, and every parameter by name:
	// phi[i], p[j] (or phi, p when constant), b[0] (share present at
	// occasion 1) and b[i] (entry between i and i+1), N[j] and B[i]. Pass
	// these to estimators.Select to rank models.
	Result *estimators.Result `json:"result"`
	// Occasions is the same estimates as a table by occasion.
	Occasions []JSMLOccasion `json:"occasions"`
	// Superpopulation is the number of animals ever present during the
	// study (the same Value as Result.N).
	Superpopulation estimators.Value `json:"superpopulation"`
}

// JollySeberML fits the Jolly-Seber model by maximum likelihood in the
// superpopulation formulation of Schwarz & Arnason (1996), the likelihood
// counterpart of the moment estimates of JollySeber. Survival phi and
// capture probability p are each Constant or Time; entry is always by
// interval, b(t).
//
// Model. A superpopulation of N animals is ever present. A share b_0 is
// present at occasion 1 and a share b_i enters between occasions i and
// i+1 (alive at i+1), Σ b_i = 1. With ψ_j the probability that an animal
// of the superpopulation is present and not yet caught at occasion j,
//
//	ψ_1 = b_0,  ψ_{j+1} = ψ_j (1 - p_j) phi_j + b_j,
//
// an animal first caught at f and last caught at l has probability
//
//	ψ_f p_f · Π_{f<=j<l} phi_j · Π_{f<j<=l} p_j^{x_j} (1-p_j)^{1-x_j} · χ_l
//
// where χ_l (the chance of not being seen after l; χ_T = 1, χ_j = 1 -
// phi_j + phi_j (1 - p_{j+1}) χ_{j+1}) is replaced by 1 for an animal lost
// on capture at l. With U distinct animals seen, the log-likelihood
// (without the constant -Σ ln n_ω!) is
//
//	ln L = ln N! - ln (N-U)! + Σ_ω n_ω ln P(ω) + (N-U) ln(1 - Σ_j ψ_j p_j),
//
// collected once into per-occasion totals so that each evaluation costs
// O(T). Working parameters are ln(N-U), multinomial logits of b (b_0 the
// reference) and logits of phi and p, maximised with estimators.Maximize.
//
// Derived quantities (Schwarz & Arnason 1996): B_i = N b_i, N_1 = N b_0
// and N_{i+1} = (N_i - L_i) phi_i + B_i, where L_i is the number lost on
// capture at occasion i. Their SEs are by the delta method: the gradient of
// each with respect to the working parameters (central differences) and
// the inverse observed information. Probabilities get logit-scale
// intervals; N_i and N get the log-normal interval with the number known
// alive at i (caught at i or before and after i) or U as the floor; B_i a
// normal interval.
//
// Identifiability. With time-varying p, p_1 is confounded with b_0 and
// p_T with b_{T-1} (and, with time-varying phi, with phi_{T-1}); we impose
// the constraints p_1 = p_2 and p_T = p_{T-1}, the usual ones for this
// model (Schwarz & Arnason 1996 discuss these confoundings). Estimates
// that exist only through those constraints are flagged Identifiable false:
// p_1, p_T, N_1, N_T, B_1, B_{T-1}, b_0, b_{T-1} and, with phi(t),
// phi_{T-1}. K (Result.Params) is the number of working parameters after
// the constraints: 3T-3 for phi(t) p(t) b(t), T+2 for phi(.) p(.) b(t).
// The AICc sample size is U, the number of distinct animals caught (our
// choice; some authors use the number of captures).
//
// Degenerate cases: fewer than 3 occasions is ErrTooFewOccasions; no
// animal caught twice is ErrNoRecaptures; an entry share or probability at
// a boundary, or a singular information matrix, sets Result.Boundary with
// a warning and SE 0 (interval kind "not available") where an SE cannot be
// computed.
func JollySeberML(h *estimators.Histories, phi, p Structure) (*JSMLResult, error) {
	name := fmt.Sprintf("Jolly-Seber (likelihood) phi(%s) p(%s) b(t)", phi, p)
	if phi != Constant && phi != Time || p != Constant && p != Time {
		return nil, fmt.Errorf("%s: %w: survival and capture probability must be constant (.) or time-dependent (t)", name, estimators.ErrInvalidInput)
	}
	if err := h.Validate(); err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	t := h.Occasions()
	if t < 3 {
		return nil, fmt.Errorf("%s: %w: %d occasions, at least 3 needed", name, estimators.ErrTooFewOccasions, t)
	}
	st := jsStats(h)
	if st.recaptures == 0 {
		return nil, fmt.Errorf("%s: %w: no animal was caught on more than one occasion", name, estimators.ErrNoRecaptures)
	}
	m := newJSModel(t, phi, p, st)
	x0 := m.start()
	fit, err := estimators.Maximize(m.logLik, m.grad, x0)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	return m.result(name, fit), nil
}

// JollySeberMLModels fits phi(t) p(t) b(t), phi(t) p(.) b(t),
// phi(.) p(t) b(t) and phi(.) p(.) b(t) and ranks them with
// estimators.Select (QAICc when cHat > 1; pass GOF.SelectionCHat from
// GoodnessOfFit). A model that fails to fit is left out and its error
// reported in the returned slice of errors; the call fails only when none
// fits.
func JollySeberMLModels(h *estimators.Histories, cHat float64) ([]*JSMLResult, estimators.Selection, []error, error) {
	var fits []*JSMLResult
	var results []*estimators.Result
	var errs []error
	for _, s := range [][2]Structure{{Time, Time}, {Time, Constant}, {Constant, Time}, {Constant, Constant}} {
		r, err := JollySeberML(h, s[0], s[1])
		if err != nil {
			errs = append(errs, err)
			continue
		}
		fits = append(fits, r)
		results = append(results, r.Result)
	}
	if len(fits) == 0 {
		return nil, estimators.Selection{}, errs, fmt.Errorf("Jolly-Seber (likelihood): no model could be fitted: %w", errs[0])
	}
	return fits, estimators.Select(results, cHat, 0), errs, nil
}

// jsSufficient holds the per-occasion totals of the histories that the
// superpopulation likelihood depends on (0-based occasions).
type jsSufficient struct {
	u          []float64 // first caught at j
	n          []float64 // caught at j
	miss       []float64 // known alive at j (first < j < last) and not caught
	alive      []float64 // first <= j < last: survived interval j
	released   []float64 // last caught at j and released (not lost)
	lost       []float64 // lost on capture at j
	knownAlive []int     // caught at j, or caught before and after j
	animals    int
	recaptures int
}

func jsStats(h *estimators.Histories) jsSufficient {
	t := h.Occasions()
	s := jsSufficient{u: make([]float64, t), n: make([]float64, t), miss: make([]float64, t),
		alive: make([]float64, t), released: make([]float64, t), lost: make([]float64, t),
		knownAlive: make([]int, t), animals: h.Animals()}
	for a, row := range h.Caught {
		first, last, count := -1, -1, 0
		for j, c := range row {
			if c {
				if first < 0 {
					first = j
				}
				last = j
				count++
				s.n[j]++
			}
		}
		if count > 1 {
			s.recaptures++
		}
		s.u[first]++
		for j := first; j < last; j++ {
			s.alive[j]++
		}
		for j := first; j <= last; j++ {
			if row[j] || j > first && j < last {
				s.knownAlive[j]++
			}
			if j > first && j < last && !row[j] {
				s.miss[j]++
			}
		}
		if h.Removed != nil && h.Removed[a] {
			s.lost[last]++
		} else {
			s.released[last]++
		}
	}
	return s
}

// jsModel maps working parameters to phi, p and b.
type jsModel struct {
	t        int
	phiS, pS Structure
	st       jsSufficient
	nPhi, nP int
	// offsets in x
	oEta, oPhi, oP int
	nx             int
	// u is U, the number of distinct animals caught.
	u float64
}

func newJSModel(t int, phi, p Structure, st jsSufficient) *jsModel {
	m := &jsModel{t: t, phiS: phi, pS: p, st: st, u: float64(st.animals)}
	m.nPhi = 1
	if phi == Time {
		m.nPhi = t - 1
	}
	m.nP = 1
	if p == Time {
		m.nP = t - 2 // p_1 = p_2 and p_T = p_{T-1}
	}
	m.oEta = 1
	m.oPhi = m.oEta + t - 1
	m.oP = m.oPhi + m.nPhi
	m.nx = m.oP + m.nP
	return m
}

// pIndex maps occasion j (0-based) to the p coefficient under the
// constraints.
func (m *jsModel) pIndex(j int) int {
	if m.pS == Constant {
		return 0
	}
	switch {
	case j == 0:
		return 0
	case j == m.t-1:
		return m.t - 3
	default:
		return j - 1
	}
}

// params fills phi (len t-1), p (len t), b (len t) and returns N.
func (m *jsModel) params(x, phi, p, b []float64) float64 {
	for i := 0; i < m.t-1; i++ {
		k := 0
		if m.phiS == Time {
			k = i
		}
		phi[i] = estimators.Expit(x[m.oPhi+k])
	}
	for j := 0; j < m.t; j++ {
		p[j] = estimators.Expit(x[m.oP+m.pIndex(j)])
	}
	// Multinomial logit with b_0 as reference, computed stably.
	mx := 0.0
	for i := 1; i < m.t; i++ {
		mx = math.Max(mx, x[m.oEta+i-1])
	}
	sum := math.Exp(-mx)
	b[0] = sum
	for i := 1; i < m.t; i++ {
		b[i] = math.Exp(x[m.oEta+i-1] - mx)
		sum += b[i]
	}
	for i := range b {
		b[i] /= sum
	}
	return m.u + math.Exp(x[0])
}

func (m *jsModel) logLik(x []float64) float64 {
	t := m.t
	phi := make([]float64, t-1)
	p := make([]float64, t)
	b := make([]float64, t)
	n := m.params(x, phi, p, b)
	if math.IsInf(n, 0) || math.IsNaN(n) {
		return math.Inf(-1)
	}
	st := &m.st
	lgN, _ := math.Lgamma(n + 1)
	lgR, _ := math.Lgamma(n - m.u + 1)
	ll := lgN - lgR
	psi := b[0]
	seen := 0.0
	chi := make([]float64, t)
	chi[t-1] = 1
	for j := t - 2; j >= 0; j-- {
		chi[j] = 1 - phi[j] + phi[j]*(1-p[j+1])*chi[j+1]
	}
	for j := 0; j < t; j++ {
		seen += psi * p[j]
		ll += jsXlogy(st.u[j], psi) + jsXlogy(st.n[j], p[j]) + jsXlogy(st.miss[j], 1-p[j]) + jsXlogy(st.released[j], chi[j])
		if j < t-1 {
			ll += jsXlogy(st.alive[j], phi[j])
			psi = psi*(1-p[j])*phi[j] + b[j+1]
		}
	}
	ll += jsXlogy(n-m.u, 1-seen)
	if math.IsNaN(ll) {
		return math.Inf(-1)
	}
	return ll
}

// grad is the analytic gradient of logLik with respect to the working
// parameters, by reverse accumulation through the recursions for psi and
// chi:
//
//	Gψ_j = u_j/ψ_j - (N-U) p_j/(1-S) + Gψ_{j+1} (1-p_j) phi_j
//	Gχ_j = r_j/χ_j + Gχ_{j-1} phi_{j-1} (1-p_j)
//
// (S = Σ ψ_j p_j, r_j the animals last released at j), from which the
// derivatives for b, p, phi and N follow by the chain rule.
func (m *jsModel) grad(g, x []float64) {
	t := m.t
	phi := make([]float64, t-1)
	p := make([]float64, t)
	b := make([]float64, t)
	n := m.params(x, phi, p, b)
	st := &m.st
	psi := make([]float64, t)
	psi[0] = b[0]
	for j := 0; j < t-1; j++ {
		psi[j+1] = psi[j]*(1-p[j])*phi[j] + b[j+1]
	}
	chi := make([]float64, t)
	chi[t-1] = 1
	for j := t - 2; j >= 0; j-- {
		chi[j] = 1 - phi[j] + phi[j]*(1-p[j+1])*chi[j+1]
	}
	seen := 0.0
	for j := 0; j < t; j++ {
		seen += psi[j] * p[j]
	}
	unseen := n - m.u
	w := 0.0 // (N-U)/(1-S)
	if unseen > 0 {
		w = unseen / (1 - seen)
	}
	gPsi := make([]float64, t)
	for j := t - 1; j >= 0; j-- {
		gPsi[j] = jsRatio(st.u[j], psi[j]) - w*p[j]
		if j < t-1 {
			gPsi[j] += gPsi[j+1] * (1 - p[j]) * phi[j]
		}
	}
	gChi := make([]float64, t)
	for j := 0; j < t; j++ {
		gChi[j] = jsRatio(st.released[j], chi[j])
		if j > 0 {
			gChi[j] += gChi[j-1] * phi[j-1] * (1 - p[j])
		}
	}
	for i := range g {
		g[i] = 0
	}
	// N = U + exp(x0).
	g[0] = (mathext.Digamma(n+1) - mathext.Digamma(unseen+1) + math.Log(1-seen)) * (n - m.u)
	// b: softmax with b_0 as reference; dlnL/db_j = Gψ_j.
	sb := 0.0
	for j := 0; j < t; j++ {
		sb += b[j] * gPsi[j]
	}
	for j := 1; j < t; j++ {
		g[m.oEta+j-1] = b[j] * (gPsi[j] - sb)
	}
	for j := 0; j < t; j++ {
		d := jsRatio(st.n[j], p[j]) - jsRatio(st.miss[j], 1-p[j]) - w*psi[j]
		if j < t-1 {
			d -= gPsi[j+1] * psi[j] * phi[j]
		}
		if j > 0 {
			d -= gChi[j-1] * phi[j-1] * chi[j]
		}
		g[m.oP+m.pIndex(j)] += d * p[j] * (1 - p[j])
	}
	for j := 0; j < t-1; j++ {
		d := jsRatio(st.alive[j], phi[j]) + gPsi[j+1]*psi[j]*(1-p[j]) + gChi[j]*(-1+(1-p[j+1])*chi[j+1])
		k := 0
		if m.phiS == Time {
			k = j
		}
		g[m.oPhi+k] += d * phi[j] * (1 - phi[j])
	}
}

// reducedCov inverts the observed information over the working
// parameters that are not at the edge of their range (a probability
// within 5e-5 of 0 or 1, an entry share below 1e-7, N within 1e-6 of U),
// holding those fixed, as is commonly done for boundary estimates. It
// returns the full-size covariance with zero rows for the fixed ones and
// their names, or nil when nothing is at the edge or the rest is still
// singular.
func (m *jsModel) reducedCov(x []float64) (*mat.SymDense, []string) {
	phi := make([]float64, m.t-1)
	p := make([]float64, m.t)
	b := make([]float64, m.t)
	m.params(x, phi, p, b)
	var free []int
	var fixed []string
	for i := range x {
		at := false
		name := ""
		switch {
		case i == 0:
			at, name = math.Exp(x[0]) < 1e-6, "N"
		case i < m.oPhi:
			at, name = b[i] < 1e-7, fmt.Sprintf("b[%d]", i)
		case i < m.oP:
			at = math.Abs(x[i]) > 9.9
			name = "phi"
			if m.phiS == Time {
				name = fmt.Sprintf("phi[%d]", i-m.oPhi+1)
			}
		default:
			at = math.Abs(x[i]) > 9.9
			name = "p"
			if m.pS == Time {
				name = fmt.Sprintf("p[%d]", i-m.oP+2)
			}
		}
		if at {
			fixed = append(fixed, name)
		} else {
			free = append(free, i)
		}
	}
	if len(fixed) == 0 || len(free) == 0 {
		return nil, nil
	}
	z := append([]float64(nil), x...)
	sub := func(y []float64) float64 {
		for k, i := range free {
			z[i] = y[k]
		}
		return m.logLik(z)
	}
	y := make([]float64, len(free))
	for k, i := range free {
		y[k] = x[i]
	}
	inv := estimators.InverseInformation(sub, y)
	if inv == nil {
		return nil, nil
	}
	full := mat.NewSymDense(len(x), nil)
	for a, i := range free {
		for b2, j := range free {
			if b2 >= a {
				full.SetSym(i, j, inv.At(a, b2))
			}
		}
	}
	return full, fixed
}

// jsRatio is c/v with 0/0 = 0 (a count of zero contributes nothing).
func jsRatio(c, v float64) float64 {
	if c == 0 {
		return 0
	}
	return c / v
}

// jsXlogy is x ln y with 0 ln 0 = 0, and -Inf for x > 0 at y <= 0.
func jsXlogy(x, y float64) float64 {
	if x == 0 {
		return 0
	}
	if y <= 0 {
		return math.Inf(-1)
	}
	return x * math.Log(y)
}

func (m *jsModel) start() []float64 {
	x := make([]float64, m.nx)
	x[0] = math.Log(0.5*m.u + 1) // N = 1.5 U + 1
	for i := m.oPhi; i < m.oP; i++ {
		x[i] = estimators.Logit(0.75)
	}
	for i := m.oP; i < m.nx; i++ {
		x[i] = 0 // p = 0.5
	}
	// Entry shares from the first captures: b_i roughly proportional to
	// u_{i+1} (new animals seen at i+1).
	u0 := math.Max(m.st.u[0], 0.5)
	for i := 1; i < m.t; i++ {
		x[m.oEta+i-1] = math.Log(math.Max(m.st.u[i], 0.5) / u0)
	}
	return x
}

// derived lists every reported quantity as a function of the working
// parameters, in the order of the result's Parameters.
type derivedQuantity struct {
	name         string
	kind         int // 0 probability, 1 abundance (log-normal), 2 count (normal)
	floor        int // log-normal floor for abundance
	identifiable bool
	f            func(phi, p, b []float64, n float64, nOcc []float64) float64
}

func (m *jsModel) quantities() []derivedQuantity {
	t := m.t
	pConstrained := func(j int) bool { return m.pS == Time && (j == 0 || j == t-1) }
	var q []derivedQuantity
	if m.phiS == Constant {
		q = append(q, derivedQuantity{name: "phi", identifiable: true, f: func(phi, _, _ []float64, _ float64, _ []float64) float64 { return phi[0] }})
	} else {
		for i := 0; i < t-1; i++ {
			q = append(q, derivedQuantity{name: fmt.Sprintf("phi[%d]", i+1), identifiable: !(m.pS == Time && i == t-2),
				f: func(phi, _, _ []float64, _ float64, _ []float64) float64 { return phi[i] }})
		}
	}
	if m.pS == Constant {
		q = append(q, derivedQuantity{name: "p", identifiable: true, f: func(_, p, _ []float64, _ float64, _ []float64) float64 { return p[0] }})
	} else {
		for j := 0; j < t; j++ {
			q = append(q, derivedQuantity{name: fmt.Sprintf("p[%d]", j+1), identifiable: !pConstrained(j),
				f: func(_, p, _ []float64, _ float64, _ []float64) float64 { return p[j] }})
		}
	}
	for i := 0; i < t; i++ {
		q = append(q, derivedQuantity{name: fmt.Sprintf("b[%d]", i), identifiable: !pConstrained(i),
			f: func(_, _, b []float64, _ float64, _ []float64) float64 { return b[i] }})
	}
	for j := 0; j < t; j++ {
		q = append(q, derivedQuantity{name: fmt.Sprintf("N[%d]", j+1), kind: 1, floor: m.st.knownAlive[j], identifiable: !pConstrained(j),
			f: func(_, _, _ []float64, _ float64, nOcc []float64) float64 { return nOcc[j] }})
	}
	for i := 0; i < t-1; i++ {
		q = append(q, derivedQuantity{name: fmt.Sprintf("B[%d]", i+1), kind: 2, identifiable: !(m.pS == Time && (i == 0 || i == t-2)),
			f: func(_, _, b []float64, n float64, _ []float64) float64 { return n * b[i+1] }})
	}
	return q
}

// evaluate computes all quantities at x.
func (m *jsModel) evaluate(x []float64, qs []derivedQuantity) ([]float64, float64) {
	t := m.t
	phi := make([]float64, t-1)
	p := make([]float64, t)
	b := make([]float64, t)
	n := m.params(x, phi, p, b)
	nOcc := make([]float64, t)
	nOcc[0] = n * b[0]
	for i := 0; i < t-1; i++ {
		nOcc[i+1] = (nOcc[i]-m.st.lost[i])*phi[i] + n*b[i+1]
	}
	out := make([]float64, len(qs))
	for k, q := range qs {
		out[k] = q.f(phi, p, b, n, nOcc)
	}
	return out, n
}

func (m *jsModel) result(name string, fit *estimators.Fit) *JSMLResult {
	t := m.t
	res := &estimators.Result{
		Method:        name,
		HasLikelihood: true,
		LogLik:        fit.LogLik,
		Params:        m.nx,
		SampleSize:    m.st.animals,
		Assumptions:   jsmlAssumptions(),
		References:    jsmlReferences(),
	}
	res.AICc = estimators.AICc(res.LogLik, res.Params, res.SampleSize)
	if m.pS == Time {
		res.Warnings = append(res.Warnings, "p[1] and p[T] are set equal to p[2] and p[T-1] so that the model is identifiable; estimates flagged not identifiable (first and last p, N and B, the first and last entry share, and with phi(t) the last survival) rest on these constraints, and so does the superpopulation size.")
	}
	if fit.Cov == nil {
		res.Boundary = true
		if cov, fixed := m.reducedCov(fit.X); cov != nil {
			fit.Cov = cov
			res.Warnings = append(res.Warnings, fmt.Sprintf("the information matrix is singular at the maximum because of estimates at the edge of their range (%s); standard errors are computed with these held fixed, so they understate the uncertainty", strings.Join(fixed, ", ")))
		} else {
			res.Warnings = append(res.Warnings, "the information matrix is singular at the maximum (an entry share or probability is at 0 or 1, or a parameter is not identifiable): standard errors are not available")
		}
	}
	qs := m.quantities()
	est, nSuper := m.evaluate(fit.X, qs)
	// Delta method: one gradient per quantity, with respect to x.
	vars := make([]float64, len(qs)+1)
	for k := range vars {
		vars[k] = math.NaN()
	}
	if fit.Cov != nil {
		g := make([]float64, m.nx)
		for k := 0; k <= len(qs); k++ {
			f := func(x []float64) float64 {
				v, n := m.evaluate(x, qs)
				if k == len(qs) {
					return n
				}
				return v[k]
			}
			fd.Gradient(g, f, fit.X, &fd.Settings{Formula: fd.Central})
			gv := mat.NewVecDense(m.nx, g)
			var cg mat.VecDense
			cg.MulVec(fit.Cov, gv)
			vars[k] = mat.Dot(gv, &cg)
		}
	}
	mk := func(q derivedQuantity, e, variance float64) estimators.Named {
		nm := estimators.Named{Name: q.name, Identifiable: q.identifiable}
		nm.Estimate = e
		se := 0.0
		if variance > 0 && !math.IsInf(variance, 0) {
			se = math.Sqrt(variance)
		}
		nm.SE = se
		switch q.kind {
		case 0:
			nm.Interval = estimators.LogitInterval(e, se)
			if e < 1e-6 || e > 1-1e-6 {
				res.Boundary = true
				res.Warnings = append(res.Warnings, fmt.Sprintf("%s is estimated at the boundary (%.6f); its SE and interval are not reliable", q.name, e))
			}
		case 1:
			nm.Interval = estimators.LogNormalIntervalN(e, se, q.floor)
		default:
			nm.Interval = estimators.NormalInterval(e, se)
		}
		if se == 0 {
			nm.Interval = estimators.Interval{Low: e, High: e, Level: estimators.DefaultLevel, Kind: estimators.CINone}
		}
		return nm
	}
	out := &JSMLResult{Result: res}
	named := make(map[string]estimators.Named, len(qs))
	for k, q := range qs {
		nm := mk(q, est[k], vars[k])
		res.Parameters = append(res.Parameters, nm)
		named[q.name] = nm
	}
	super := mk(derivedQuantity{name: "N", kind: 1, floor: m.st.animals, identifiable: true}, nSuper, vars[len(qs)])
	out.Superpopulation = super.Value
	res.N = &out.Superpopulation
	if m.nx >= m.st.animals {
		res.Warnings = append(res.Warnings, "more parameters than animals caught: AICc is undefined and the model sorts last")
	}
	for j := 0; j < t; j++ {
		occ := JSMLOccasion{Occasion: j + 1, N: named[fmt.Sprintf("N[%d]", j+1)]}
		if m.pS == Constant {
			occ.P = named["p"]
			occ.P.Name = fmt.Sprintf("p[%d]", j+1)
		} else {
			occ.P = named[fmt.Sprintf("p[%d]", j+1)]
		}
		if j < t-1 {
			var ph estimators.Named
			if m.phiS == Constant {
				ph = named["phi"]
				ph.Name = fmt.Sprintf("phi[%d]", j+1)
			} else {
				ph = named[fmt.Sprintf("phi[%d]", j+1)]
			}
			bb := named[fmt.Sprintf("B[%d]", j+1)]
			en := named[fmt.Sprintf("b[%d]", j+1)]
			occ.Phi, occ.B, occ.Entry = &ph, &bb, &en
		}
		out.Occasions = append(out.Occasions, occ)
	}
	return out
}

func jsmlAssumptions() []string {
	return []string{
		"Every animal present at an occasion, marked or not, has the same capture probability; every animal alive after an occasion has the same probability of surviving to the next.",
		"Survival is apparent: death and permanent emigration are not told apart; entry combines births and immigration.",
		"Marks are not lost, overlooked or misread; sampling is brief relative to the intervals; animals lost on capture leave the population at that occasion.",
		"With time-varying capture probability, the first and last capture probabilities are set equal to their neighbours to make the model identifiable.",
	}
}

func jsmlReferences() []string {
	return []string{
		"Schwarz, C.J. & Arnason, A.N. (1996) A general methodology for the analysis of capture-recapture experiments in open populations. Biometrics 52: 860-873.",
		"Jolly, G.M. (1965) Explicit estimates from capture-recapture data with both death and immigration-stochastic model. Biometrika 52: 225-247.",
		"Seber, G.A.F. (1965) A note on the multiple-recapture census. Biometrika 52: 249-259.",
	}
}
