package open

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/diff/fd"
	"gonum.org/v1/gonum/mat"

	"tagtally/estimators"
)

// RobustModel chooses the structure of a RobustDesignML fit.
type RobustModel struct {
	// Emigration is NoEmigration or RandomEmigration.
	Emigration string
	// TimeWithin lets the capture probability vary between the secondary
	// occasions of a primary (model Mt within primaries); otherwise it is
	// one value per primary (model M0 within primaries).
	TimeWithin bool
}

// String names the model, e.g. "M0 within primaries, phi(t), temporary
// emigration: random".
func (r RobustModel) String() string {
	within := "M0"
	if r.TimeWithin {
		within = "Mt"
	}
	return fmt.Sprintf("%s within primaries, phi(t), temporary emigration: %s", within, r.Emigration)
}

// Temporary emigration models for RobustDesignML.
const (
	// NoEmigration: every animal alive is in the study area in every
	// primary period (gamma = 0).
	NoEmigration = "none"
	// RandomEmigration: in each primary period an animal alive is away
	// with probability gamma_i, independently of where it was before
	// (Kendall, Nichols & Hines 1997, "random" temporary emigration).
	RandomEmigration = "random"
)

// RobustMLPrimary is one primary period of a RobustDesignML fit.
type RobustMLPrimary struct {
	// Primary is numbered from 1; Occasions are the 1-based columns of its
	// secondary occasions.
	Primary   int   `json:"primary"`
	Occasions []int `json:"occasions"`
	// Caught is the number of distinct animals caught in the primary,
	// Marked how many of them had been caught in an earlier primary.
	Caught int `json:"caught"`
	Marked int `json:"marked"`
	// P is the capture probability per secondary occasion: one value
	// (M0 within primaries) or one per secondary (Mt). PStar is the
	// probability of being caught at least once in the primary when
	// present, 1 - Π_s (1 - p_s).
	P     []estimators.Named `json:"p"`
	PStar estimators.Named   `json:"p_star"`
	// N is the number of animals present in the study area during the
	// primary (alive and not away).
	N estimators.Named `json:"N"`
	// Phi is survival to the next primary (nil for the last).
	Phi *estimators.Named `json:"phi,omitempty"`
	// Gamma is the probability of being away during this primary (random
	// temporary emigration; nil without emigration and for primary 1).
	Gamma *estimators.Named `json:"gamma,omitempty"`
	// B is the number of animals that joined between this primary and the
	// next and were present at the next (no-emigration model only; nil
	// for the last primary).
	B *estimators.Named `json:"B,omitempty"`
}

// RobustMLResult is a robust-design model fitted by its joint likelihood.
type RobustMLResult struct {
	// Result carries the model name, log-likelihood, K, AICc and every
	// parameter by name (phi[i], gamma[i], p[i], p*[i], N[i], B[i], with i
	// the primary period; p[i,s] for secondary s with Mt within
	// primaries), for estimators.Select.
	Result    *estimators.Result `json:"result"`
	Primaries []RobustMLPrimary  `json:"primaries"`
}

// RobustDesignML fits Pollock's robust design by maximum likelihood
// (Kendall, Pollock & Brownie 1995; with temporary emigration, Kendall,
// Nichols & Hines 1997), with model M0 within each primary period (one
// capture probability p_i for every secondary occasion of primary i) or,
// with model.TimeWithin, model Mt (p_is for secondary s), survival phi_i
// between primaries, and model.Emigration NoEmigration or
// RandomEmigration. primary[j] is the primary period of occasion j, as for
// RobustDesignAdHoc. The formulas below are written for M0; for Mt,
// (1-p_i)^S_i becomes Π_s (1-p_is) and each secondary uses its own p_is.
//
// Likelihood. We write it as the product of two parts, following the
// split of the Jolly-Seber likelihood into first captures and recaptures
// given releases (the arrangement is ours; the model is that of the
// references):
//
//   - First captures. In primary i, U_i unmarked animals are present; u_i
//     of them are caught, each first at secondary s with probability
//     (1-p_i)^(s-1) p_i, which gives the terms lnΓ(U_i+1) -
//     lnΓ(U_i-u_i+1), Σ_first [(s-1) ln(1-p_i) + ln p_i] and
//     S_i (U_i - u_i) ln(1-p_i).
//   - Recaptures. After its first capture an animal is caught on each
//     later secondary of that primary with probability p_i; it survives
//     from primary j to j+1 with probability phi_j; in a later primary it
//     is present with probability 1-gamma_j and, if present, caught on
//     each secondary with probability p_j. A primary in which a known-
//     alive animal was not caught has probability
//     q_j = gamma_j + (1-gamma_j)(1-p_j)^S_j; after its last capture an
//     animal released alive contributes χ_l (χ_K = 1,
//     χ_j = 1 - phi_j + phi_j q_{j+1} χ_{j+1}); an animal lost on capture
//     contributes nothing after its loss.
//
// The log-likelihood (without multinomial constants) is collected into
// per-primary totals, so each evaluation costs O(primaries). Working
// parameters are logits of phi, gamma and p and ln(U_i - u_i); the
// maximum is found with estimators.Maximize.
//
// Derived: p*_i = 1 - (1-p_i)^S_i and N_i = U_i + m_i / p*_i, with m_i the
// marked animals caught in primary i (the marked animals present,
// estimated by m_i / p*_i). Its SE adds the delta-method variance from
// the fit and the binomial variance m_i (1-p*_i) / p*_i². Without
// emigration, B_i = N_{i+1} - phi_i (N_i - L_i) (L_i lost on capture), SE
// by the delta method with the same binomial terms.
//
// Identifiability. gamma_1 does not exist (no marked animal can be away
// in primary 1). With random emigration the last survival and the last
// gamma enter only as phi_{K-1} (1 - gamma_K); we impose gamma_K =
// gamma_{K-1}, one of the constraints Kendall, Nichols & Hines (1997)
// discuss (from memory); gamma_K is then flagged Identifiable false and
// K counts it once. K = (K-1) + K + K = 3K-1 without emigration (phi, p,
// U) with M0 within primaries, (K-1) + T + K with Mt (T occasions in
// all), plus K-2 gammas with random emigration. The AICc sample size is the number of
// distinct animals caught.
//
// Page numbers and bibliographic details of the references are from
// memory.
//
// Errors: as RobustDesignAdHoc for the primary labels (at least 3
// primaries, each with at least 2 secondaries); ErrNoRecaptures when no
// animal was caught in two primaries; ErrInvalidInput for an unknown
// emigration model. Boundary estimates are flagged as in JollySeberML,
// with SEs computed holding the boundary parameters fixed.
func RobustDesignML(h *estimators.Histories, primary []int, model RobustModel) (*RobustMLResult, error) {
	name := "robust design (likelihood) " + model.String()
	if model.Emigration != NoEmigration && model.Emigration != RandomEmigration {
		return nil, fmt.Errorf("%s: %w: emigration model %q, want %q or %q", name, estimators.ErrInvalidInput, model.Emigration, NoEmigration, RandomEmigration)
	}
	if err := h.Validate(); err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	groups, err := primaryGroups(primary, h.Occasions())
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	st := robustStats(h, groups)
	if st.marked == 0 {
		return nil, fmt.Errorf("%s: %w: no animal was caught in two primary periods", name, estimators.ErrNoRecaptures)
	}
	m := newRobustModel(st, model.Emigration == RandomEmigration, model.TimeWithin)
	fit, err := estimators.Maximize(m.logLik, nil, m.start())
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	return m.result(name, fit, groups), nil
}

// primaryGroups checks the primary labels and returns the occasions of
// each primary period (0-based).
func primaryGroups(primary []int, t int) ([][]int, error) {
	if len(primary) != t {
		return nil, fmt.Errorf("%w: %d primary-period labels for %d occasions", estimators.ErrInvalidInput, len(primary), t)
	}
	var groups [][]int
	for j := 0; j < t; j++ {
		if j > 0 && primary[j] < primary[j-1] {
			return nil, fmt.Errorf("%w: occasion %d has primary period %d after %d: periods must not decrease", estimators.ErrInvalidInput, j+1, primary[j], primary[j-1])
		}
		if j == 0 || primary[j] != primary[j-1] {
			groups = append(groups, []int{j})
		} else {
			groups[len(groups)-1] = append(groups[len(groups)-1], j)
		}
	}
	if len(groups) < 3 {
		return nil, fmt.Errorf("%w: %d primary periods, at least 3 needed for survival", estimators.ErrTooFewOccasions, len(groups))
	}
	for i, g := range groups {
		if len(g) < 2 {
			return nil, fmt.Errorf("%w: primary period %d has one secondary occasion; closed models need at least 2", estimators.ErrTooFewOccasions, i+1)
		}
	}
	return groups, nil
}

// robustTotals are the per-primary totals of the robust-design likelihood.
type robustTotals struct {
	k          int
	groups     [][]int   // occasions of each primary
	occPrimary []int     // primary of each occasion
	occFirst   []float64 // first captures on the occasion
	occBefore  []float64 // animals first caught later in the same primary
	occHits    []float64 // within-primary recaptures on the occasion
	occMiss    []float64 // within-primary misses after first capture
	s          []float64 // secondaries per primary
	u          []float64 // first caught in the primary
	firstMiss  []float64 // Σ (s-1) over first captures
	hits, miss []float64 // within-primary Bernoulli trials after first capture
	present    []float64 // marked animals caught in the primary (m_i)
	notCaught  []float64 // known alive, not caught in the primary
	alive      []float64 // survived from primary j to j+1 (known)
	released   []float64 // last caught in the primary and released alive
	lost       []float64 // lost on capture in the primary
	caught     []int     // distinct animals caught
	marked     int       // animals caught in two or more primaries
	animals    int
}

func robustStats(h *estimators.Histories, groups [][]int) *robustTotals {
	k := len(groups)
	t := h.Occasions()
	st := &robustTotals{k: k, animals: h.Animals(), groups: groups, occPrimary: make([]int, t),
		occFirst: make([]float64, t), occBefore: make([]float64, t), occHits: make([]float64, t), occMiss: make([]float64, t)}
	for i, g := range groups {
		for _, j := range g {
			st.occPrimary[j] = i
		}
	}
	for _, p := range []*[]float64{&st.s, &st.u, &st.firstMiss, &st.hits, &st.miss, &st.present, &st.notCaught, &st.alive, &st.released, &st.lost} {
		*p = make([]float64, k)
	}
	st.caught = make([]int, k)
	for i, g := range groups {
		st.s[i] = float64(len(g))
	}
	in := make([]bool, k)
	for a, row := range h.Caught {
		lostAnimal := h.Removed != nil && h.Removed[a]
		first, last := -1, -1
		for i, g := range groups {
			in[i] = false
			for _, j := range g {
				if row[j] {
					in[i] = true
				}
			}
			if in[i] {
				if first < 0 {
					first = i
				}
				last = i
				st.caught[i]++
			}
		}
		if last > first {
			st.marked++
		}
		// The secondary of the animal's last capture, where a loss ends it.
		lastOcc := -1
		for j := len(row) - 1; j >= 0; j-- {
			if row[j] {
				lastOcc = j
				break
			}
		}
		for i := first; i <= last; i++ {
			g := groups[i]
			if i > first {
				if in[i] {
					st.present[i]++
				} else {
					st.notCaught[i]++
				}
			}
			if i < last {
				st.alive[i]++
			}
			if !in[i] {
				continue
			}
			started := i > first // later primaries: every secondary is a trial
			for s, j := range g {
				if !started {
					if row[j] {
						st.u[i]++
						st.firstMiss[i] += float64(s)
						st.occFirst[j]++
						for _, jb := range g[:s] {
							st.occBefore[jb]++
						}
						started = true
						if lostAnimal && j == lastOcc {
							break
						}
					}
					continue
				}
				if row[j] {
					st.hits[i]++
					st.occHits[j]++
				} else {
					st.miss[i]++
					st.occMiss[j]++
				}
				if lostAnimal && j == lastOcc {
					break
				}
			}
		}
		if lostAnimal {
			st.lost[last]++
		} else {
			st.released[last]++
		}
	}
	return st
}

type robustModel struct {
	st     *robustTotals
	random bool
	mt     bool
	k, t   int
	// offsets in x: phi (k-1), gamma (k-2 when random), p (k, or t with
	// Mt), ln(U-u) (k)
	oPhi, oGamma, oP, oU, nx int
}

// pIndex is the p coefficient of occasion j.
func (m *robustModel) pIndex(j int) int {
	if m.mt {
		return j
	}
	return m.st.occPrimary[j]
}

func newRobustModel(st *robustTotals, random, mt bool) *robustModel {
	m := &robustModel{st: st, random: random, mt: mt, k: st.k, t: len(st.occPrimary)}
	m.oPhi = 0
	m.oGamma = m.k - 1
	nGamma := 0
	if random {
		nGamma = m.k - 2
	}
	m.oP = m.oGamma + nGamma
	nP := m.k
	if mt {
		nP = m.t
	}
	m.oU = m.oP + nP
	m.nx = m.oU + m.k
	return m
}

// params fills phi (k-1), gamma (k; gamma[0] = 0), p (per occasion, t)
// and U (k).
func (m *robustModel) params(x, phi, gamma, p, U []float64) {
	k := m.k
	for i := 0; i < k-1; i++ {
		phi[i] = estimators.Expit(x[m.oPhi+i])
	}
	for i := 0; i < k; i++ {
		gamma[i] = 0
		if m.random && i >= 1 {
			idx := min(i, k-2) - 1 // gamma_K = gamma_{K-1}
			gamma[i] = estimators.Expit(x[m.oGamma+idx])
		}
		U[i] = m.st.u[i] + math.Exp(x[m.oU+i])
	}
	for j := range p {
		p[j] = estimators.Expit(x[m.oP+m.pIndex(j)])
	}
}

// missAll is Π_s (1 - p_s) over the secondaries of primary i.
func (m *robustModel) missAll(p []float64, i int) float64 {
	v := 1.0
	for _, j := range m.st.groups[i] {
		v *= 1 - p[j]
	}
	return v
}

func (m *robustModel) logLik(x []float64) float64 {
	k := m.k
	st := m.st
	phi := make([]float64, k-1)
	gamma := make([]float64, k)
	p := make([]float64, m.t)
	U := make([]float64, k)
	m.params(x, phi, gamma, p, U)
	q := make([]float64, k)
	for i := 0; i < k; i++ {
		q[i] = gamma[i] + (1-gamma[i])*m.missAll(p, i)
	}
	chi := make([]float64, k)
	chi[k-1] = 1
	for i := k - 2; i >= 0; i-- {
		chi[i] = 1 - phi[i] + phi[i]*q[i+1]*chi[i+1]
	}
	ll := 0.0
	for i := 0; i < k; i++ {
		a, _ := math.Lgamma(U[i] + 1)
		b, _ := math.Lgamma(U[i] - st.u[i] + 1)
		ll += a - b
		for _, j := range st.groups[i] {
			ll += jsXlogy(st.occFirst[j]+st.occHits[j], p[j])
			ll += jsXlogy(st.occBefore[j]+st.occMiss[j]+U[i]-st.u[i], 1-p[j])
		}
		ll += jsXlogy(st.present[i], 1-gamma[i]) + jsXlogy(st.notCaught[i], q[i]) + jsXlogy(st.released[i], chi[i])
		if i < k-1 {
			ll += jsXlogy(st.alive[i], phi[i])
		}
	}
	if math.IsNaN(ll) {
		return math.Inf(-1)
	}
	return ll
}

func (m *robustModel) start() []float64 {
	x := make([]float64, m.nx)
	for i := 0; i < m.k-1; i++ {
		x[m.oPhi+i] = estimators.Logit(0.7)
	}
	if m.random {
		for i := m.oGamma; i < m.oP; i++ {
			x[i] = estimators.Logit(0.2)
		}
	}
	for i := 0; i < m.k; i++ {
		// A start from the within-primary capture rate of the marked
		// animals and a U with p* of that p.
		p := 0.3
		if tr := m.st.hits[i] + m.st.miss[i]; tr > 0 && m.st.hits[i] > 0 {
			p = math.Min(0.9, m.st.hits[i]/tr)
		}
		for _, j := range m.st.groups[i] {
			x[m.oP+m.pIndex(j)] = estimators.Logit(p)
		}
		pstar := 1 - math.Pow(1-p, m.st.s[i])
		x[m.oU+i] = math.Log(m.st.u[i]*(1-pstar)/pstar + 1)
	}
	return x
}

// robustQuantity is one reported value as a function of the working
// parameters.
type robustQuantity struct {
	name         string
	kind         int                                      // 0 probability, 1 abundance, 2 count
	floor        int                                      // log-normal floor for abundance
	binomVar     func(p []float64, phi []float64) float64 // extra variance, may be nil
	identifiable bool
	// primaries lists the primaries (0-based) the quantity needs captures
	// in; with none caught there it is not estimable.
	primaries []int
	f         func(phi, gamma, p, U []float64) float64
}

func (m *robustModel) quantities() []robustQuantity {
	k, st := m.k, m.st
	pstar := func(p []float64, i int) float64 { return 1 - m.missAll(p, i) }
	nAt := func(p, U []float64, i int) float64 { return U[i] + jsRatio(st.present[i], pstar(p, i)) }
	hvar := func(i int) func(p, _ []float64) float64 {
		return func(p, _ []float64) float64 {
			ps := pstar(p, i)
			return jsRatio(st.present[i]*(1-ps), ps*ps)
		}
	}
	var q []robustQuantity
	for i := 0; i < k-1; i++ {
		q = append(q, robustQuantity{name: fmt.Sprintf("phi[%d]", i+1), identifiable: true,
			f: func(phi, _, _, _ []float64) float64 { return phi[i] }})
	}
	if m.random {
		for i := 1; i < k; i++ {
			q = append(q, robustQuantity{name: fmt.Sprintf("gamma[%d]", i+1), identifiable: i < k-1,
				f: func(_, gamma, _, _ []float64) float64 { return gamma[i] }})
		}
	}
	for i := 0; i < k; i++ {
		if !m.mt {
			j := st.groups[i][0]
			q = append(q, robustQuantity{name: fmt.Sprintf("p[%d]", i+1), identifiable: true, primaries: []int{i},
				f: func(_, _, p, _ []float64) float64 { return p[j] }})
			continue
		}
		for s, j := range st.groups[i] {
			q = append(q, robustQuantity{name: fmt.Sprintf("p[%d,%d]", i+1, s+1), identifiable: true, primaries: []int{i},
				f: func(_, _, p, _ []float64) float64 { return p[j] }})
		}
	}
	for i := 0; i < k; i++ {
		q = append(q, robustQuantity{name: fmt.Sprintf("p*[%d]", i+1), identifiable: true, primaries: []int{i},
			f: func(_, _, p, _ []float64) float64 { return pstar(p, i) }})
	}
	for i := 0; i < k; i++ {
		q = append(q, robustQuantity{name: fmt.Sprintf("N[%d]", i+1), kind: 1, floor: st.caught[i], identifiable: true, binomVar: hvar(i), primaries: []int{i},
			f: func(_, _, p, U []float64) float64 { return nAt(p, U, i) }})
	}
	if !m.random {
		for i := 0; i < k-1; i++ {
			q = append(q, robustQuantity{name: fmt.Sprintf("B[%d]", i+1), kind: 2, identifiable: true, primaries: []int{i, i + 1},
				binomVar: func(p, phi []float64) float64 {
					return hvar(i+1)(p, phi) + phi[i]*phi[i]*hvar(i)(p, phi)
				},
				f: func(phi, _, p, U []float64) float64 {
					return nAt(p, U, i+1) - phi[i]*(nAt(p, U, i)-st.lost[i])
				}})
		}
	}
	return q
}

func (m *robustModel) evaluate(x []float64, qs []robustQuantity) ([]float64, []float64) {
	k := m.k
	phi := make([]float64, k-1)
	gamma := make([]float64, k)
	p := make([]float64, m.t)
	U := make([]float64, k)
	m.params(x, phi, gamma, p, U)
	out := make([]float64, len(qs))
	extra := make([]float64, len(qs))
	for i, q := range qs {
		out[i] = q.f(phi, gamma, p, U)
		if q.binomVar != nil {
			extra[i] = q.binomVar(p, phi)
		}
	}
	return out, extra
}

// reducedCov is jsModel.reducedCov for this model: probabilities within
// 5e-5 of 0 or 1 and unmarked counts within 1e-6 of u are held fixed.
func (m *robustModel) reducedCov(x []float64) (*mat.SymDense, []string) {
	var free []int
	var fixed []string
	for i := range x {
		var at bool
		var name string
		switch {
		case i >= m.oU:
			at, name = math.Exp(x[i]) < 1e-6, fmt.Sprintf("N[%d]", i-m.oU+1)
		case i >= m.oP:
			at, name = math.Abs(x[i]) > 9.9, fmt.Sprintf("p[%d]", i-m.oP+1)
			if m.mt {
				j := i - m.oP
				pi := m.st.occPrimary[j]
				name = fmt.Sprintf("p[%d,%d]", pi+1, j-m.st.groups[pi][0]+1)
			}
		case i >= m.oGamma:
			at, name = math.Abs(x[i]) > 9.9, fmt.Sprintf("gamma[%d]", i-m.oGamma+2)
		default:
			at, name = math.Abs(x[i]) > 9.9, fmt.Sprintf("phi[%d]", i+1)
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
		for a, i := range free {
			z[i] = y[a]
		}
		return m.logLik(z)
	}
	y := make([]float64, len(free))
	for a, i := range free {
		y[a] = x[i]
	}
	inv := estimators.InverseInformation(sub, y)
	if inv == nil {
		return nil, nil
	}
	full := mat.NewSymDense(len(x), nil)
	for a, i := range free {
		for b := a; b < len(free); b++ {
			full.SetSym(i, free[b], inv.At(a, b))
		}
	}
	return full, fixed
}

func (m *robustModel) result(name string, fit *estimators.Fit, groups [][]int) *RobustMLResult {
	k := m.k
	res := &estimators.Result{
		Method:        name,
		HasLikelihood: true,
		LogLik:        fit.LogLik,
		Params:        m.nx,
		SampleSize:    m.st.animals,
		Assumptions: []string{
			"The population is closed within each primary period, and every animal present has the same capture probability on a secondary occasion (the same on every secondary with M0 within primaries, varying by secondary with Mt).",
			"Between primary periods every animal has the same survival probability; survival is apparent (death and permanent emigration are not told apart).",
			"Temporary emigration, when modelled, is random: whether an animal is away during a primary does not depend on where it was before.",
			"Marks are not lost or misread; animals act independently; animals lost on capture leave the population.",
		},
		References: []string{
			"Pollock, K.H. (1982) A capture-recapture design robust to unequal probability of capture. Journal of Wildlife Management 46: 752-757.",
			"Kendall, W.L., Pollock, K.H. & Brownie, C. (1995) A likelihood-based approach to capture-recapture estimation of demographic parameters under the robust design. Biometrics 51: 293-308.",
			"Kendall, W.L., Nichols, J.D. & Hines, J.E. (1997) Estimating temporary emigration using capture-recapture data with Pollock's robust design. Ecology 78: 563-578.",
		},
	}
	res.AICc = estimators.AICc(res.LogLik, res.Params, res.SampleSize)
	if m.random {
		res.Warnings = append(res.Warnings, fmt.Sprintf("gamma[%d] is set equal to gamma[%d]: only phi[%d]·(1 - gamma[%d]) is identifiable otherwise", k, k-1, k-1, k))
	}
	if fit.Cov == nil {
		res.Boundary = true
		if cov, fixed := m.reducedCov(fit.X); cov != nil {
			fit.Cov = cov
			res.Warnings = append(res.Warnings, fmt.Sprintf("the information matrix is singular at the maximum because of estimates at the edge of their range (%v); standard errors are computed with these held fixed, so they understate the uncertainty", fixed))
		} else {
			res.Warnings = append(res.Warnings, "the information matrix is singular at the maximum: standard errors are not available")
		}
	}
	qs := m.quantities()
	est, extra := m.evaluate(fit.X, qs)
	vars := make([]float64, len(qs))
	for i := range vars {
		vars[i] = math.NaN()
	}
	if fit.Cov != nil {
		g := make([]float64, m.nx)
		for i := range qs {
			f := func(x []float64) float64 {
				v, _ := m.evaluate(x, qs)
				return v[i]
			}
			fd.Gradient(g, f, fit.X, &fd.Settings{Formula: fd.Central})
			gv := mat.NewVecDense(m.nx, g)
			var cg mat.VecDense
			cg.MulVec(fit.Cov, gv)
			vars[i] = mat.Dot(gv, &cg) + extra[i]
		}
	}
	for i := 0; i < k; i++ {
		if m.st.caught[i] == 0 {
			res.Boundary = true
			res.Warnings = append(res.Warnings, fmt.Sprintf("nothing was caught in primary %d: its p, p* and N (and the recruits on either side) are not estimable and are reported as 0, not identifiable", i+1))
		}
	}
	named := map[string]estimators.Named{}
	for i, q := range qs {
		nm := estimators.Named{Name: q.name, Identifiable: q.identifiable}
		nm.Estimate = est[i]
		if vars[i] > 0 && !math.IsInf(vars[i], 0) {
			nm.SE = math.Sqrt(vars[i])
		}
		for _, pi := range q.primaries {
			if m.st.caught[pi] == 0 {
				nm.Identifiable = false
				nm.Estimate, nm.SE = 0, 0
			}
		}
		if math.IsNaN(nm.Estimate) || math.IsInf(nm.Estimate, 0) {
			nm.Identifiable = false
			nm.Estimate, nm.SE = 0, 0
			res.Boundary = true
			res.Warnings = append(res.Warnings, fmt.Sprintf("%s cannot be computed at the maximum and is reported as 0, not identifiable", q.name))
		}
		switch q.kind {
		case 0:
			nm.Interval = estimators.LogitInterval(nm.Estimate, nm.SE)
			if nm.Estimate < 1e-6 || nm.Estimate > 1-1e-6 {
				res.Boundary = true
				res.Warnings = append(res.Warnings, fmt.Sprintf("%s is estimated at the boundary (%.6f); its SE and interval are not reliable", q.name, nm.Estimate))
			}
		case 1:
			nm.Interval = estimators.LogNormalIntervalN(nm.Estimate, nm.SE, q.floor)
		default:
			nm.Interval = estimators.NormalInterval(nm.Estimate, nm.SE)
		}
		if nm.SE == 0 {
			nm.Interval = estimators.Interval{Low: nm.Estimate, High: nm.Estimate, Level: estimators.DefaultLevel, Kind: estimators.CINone}
		}
		res.Parameters = append(res.Parameters, nm)
		named[q.name] = nm
	}
	out := &RobustMLResult{Result: res}
	for i := 0; i < k; i++ {
		rp := RobustMLPrimary{Primary: i + 1, Caught: m.st.caught[i], Marked: int(m.st.present[i]),
			PStar: named[fmt.Sprintf("p*[%d]", i+1)], N: named[fmt.Sprintf("N[%d]", i+1)]}
		if m.mt {
			for s := range groups[i] {
				rp.P = append(rp.P, named[fmt.Sprintf("p[%d,%d]", i+1, s+1)])
			}
		} else {
			rp.P = []estimators.Named{named[fmt.Sprintf("p[%d]", i+1)]}
		}
		for _, j := range groups[i] {
			rp.Occasions = append(rp.Occasions, j+1)
		}
		if v, ok := named[fmt.Sprintf("phi[%d]", i+1)]; ok {
			rp.Phi = &v
		}
		if v, ok := named[fmt.Sprintf("gamma[%d]", i+1)]; ok {
			rp.Gamma = &v
		}
		if v, ok := named[fmt.Sprintf("B[%d]", i+1)]; ok {
			rp.B = &v
		}
		out.Primaries = append(out.Primaries, rp)
	}
	return out
}
