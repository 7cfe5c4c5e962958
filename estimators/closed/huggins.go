package closed

import (
	"fmt"
	"math"
	"sort"
	"strings"

	"gonum.org/v1/gonum/mat"

	"tagtally/estimators"
)

// Huggins fits the conditional likelihood of Huggins (1989): capture
// probabilities depend on individual covariates (and, when timeEffects is
// true, on the occasion) through
//
//	logit p_ij = β0 + Σ_k β_k z_ik + α_j      (α_1 = 0; α_j only with time effects)
//
// and the likelihood is conditioned on each animal having been caught at
// least once, so N does not appear in it:
//
//	lnL = Σ_i [ Σ_j (x_ij ln p_ij + (1−x_ij) ln(1−p_ij)) − ln p*_i ],
//	p*_i = 1 − Π_j (1 − p_ij)
//
// (occasions after an animal's loss on capture are left out of its first
// sum; p*_i runs over all t occasions). Animals sharing a history and the
// same covariate values are one term with a count.
//
// N is the Horvitz-Thompson sum N̂ = Σ_i 1/p̂*_i, and its variance is the sum
// of a Horvitz-Thompson term and a delta-method term (Huggins 1989):
//
//	var(N̂) = Σ_i (1 − p̂*_i)/p̂*_i² + D' Σ_β D,   D = ∂N̂/∂β
//
// with Σ_β the inverse observed information of the coefficients. The 95%
// interval is the log-normal one of Chao (1987), never below Mt1.
//
// covariates names entries of h.Covariates (e.g. "mass", "male" as 0/1);
// each is centred and scaled internally for the optimiser and the
// coefficients are reported per unit of the covariate. LogLik is the
// conditional log-likelihood (without a multinomial constant): compare it
// by AICc only with other Huggins fits of the same animals, never with the
// full-likelihood models M0...Mth. K = 1 + len(covariates) (+ t − 1 with
// time effects). SampleSize is Mt1.
//
// Degenerate cases: a missing, non-finite or constant covariate gives
// ErrInvalidInput; no recaptures ErrNoRecaptures; every animal caught every
// time a boundary result N = Mt1.
func Huggins(h *estimators.Histories, covariates []string, timeEffects bool) (*estimators.Result, error) {
	method := "Huggins p(" + hugginsLabel(covariates, timeEffects) + ")"
	ev, st, mean, sd, err := newHugginsEval(method, h, covariates, timeEffects)
	if err != nil {
		return nil, err
	}
	t, nc, rows := st.t, len(covariates), ev.rows
	k := 1 + nc
	if timeEffects {
		k += t - 1
	}
	res := &estimators.Result{
		Method:        method,
		HasLikelihood: true,
		Params:        k,
		SampleSize:    st.mt1,
		Assumptions: []string{
			assumeClose, assumeMarks, assumeIndep,
			"Capture probability depends on the animal's recorded covariates" + map[bool]string{true: " and on the occasion", false: ""}[timeEffects] + " through a logistic model; animals with the same covariates are alike, and being caught does not change it.",
			"The covariates are measured without error and do not change during the study.",
			"This is a conditional likelihood: its AICc compares only with other conditional-likelihood fits of the same animals.",
		},
		References: []string{refHuggins, "Chao, A. (1987) Estimating the population size for capture-recapture data with unequal catchability. Biometrics 43:783-791."},
	}
	if st.allCaughtEveryTime() {
		mt1 := float64(st.mt1)
		res.N = &estimators.Value{Estimate: mt1, Interval: estimators.Interval{Low: mt1, High: mt1, Level: estimators.DefaultLevel, Kind: estimators.CILogNormal}}
		res.Boundary = true
		res.Warnings = []string{"every animal was caught on every occasion it could be, so N is estimated as the number caught (Mt1) with every capture probability 1; this is a boundary estimate without a standard error"}
		res.AICc = finiteAICc(0, k, st.mt1)
		return res, nil
	}

	x0 := make([]float64, k)
	x0[0] = clampedLogit(st.total / st.trials)
	f, err := maximizeScaled(ev.ll, ev.grad, x0, float64(st.mt1))
	if err != nil {
		return nil, wrapMethod(method, err)
	}
	if math.IsNaN(f.LogLik) || math.IsInf(f.LogLik, 0) {
		return nil, fmt.Errorf("closed %s: %w: the log-likelihood is not finite at the optimum", method, estimators.ErrNotConverged)
	}
	res.LogLik = f.LogLik
	res.AICc = finiteAICc(f.LogLik, k, st.mt1)
	if res.AICc == 0 {
		res.Warnings = append(res.Warnings, fmt.Sprintf("AICc is undefined: %d parameters for %d animals caught", k, st.mt1))
	}

	// Horvitz-Thompson N and Huggins' variance.
	nHat, htVar := 0.0, 0.0
	dN := make([]float64, k)
	for ri := range rows {
		r := &rows[ri]
		ev.fill(f.X, r)
		q := 0.0 // ln Π_j (1 − p_ij)
		for j := 0; j < t; j++ {
			q -= softplus(ev.eta[j])
		}
		pstar := -math.Expm1(q)
		if !(pstar > 0) {
			return nil, fmt.Errorf("closed %s: %w: an animal's estimated chance of ever being caught is 0", method, estimators.ErrNotConverged)
		}
		nHat += r.count / pstar
		htVar += r.count * (1 - pstar) / (pstar * pstar)
		// ∂(1/p*)/∂η_ij = −Q p_ij / p*², Q = Π(1−p)
		qv := math.Exp(q)
		for j := 0; j < t; j++ {
			d := -r.count * qv * ev.p[j] / (pstar * pstar)
			dN[0] += d
			for c := 0; c < nc; c++ {
				dN[1+c] += d * r.z[c]
			}
			if timeEffects && j > 0 {
				dN[nc+j] += d
			}
		}
	}
	seN := 0.0
	if f.Cov != nil {
		dv := mat.NewVecDense(k, dN)
		v := htVar + mat.Inner(dv, f.Cov, dv)
		seN = math.Sqrt(v)
	} else {
		res.Warnings = append(res.Warnings, "the observed information matrix is singular at the optimum, so standard errors are not available (a coefficient is not identifiable from these data or sits on a boundary)")
	}
	res.N = &estimators.Value{Estimate: nHat, SE: seN, Interval: estimators.LogNormalIntervalN(nHat, seN, st.mt1)}

	// Coefficients on the covariates' own units: with z' = (z − m)/s,
	// β_k = β'_k / s_k and β0 = β'_0 − Σ β'_k m_k / s_k. J maps working to
	// reported coefficients; their covariance is J Σ J'.
	J := mat.NewDense(k, k, nil)
	for i := 0; i < k; i++ {
		J.Set(i, i, 1)
	}
	for c := 0; c < nc; c++ {
		J.Set(1+c, 1+c, 1/sd[c])
		J.Set(0, 1+c, -mean[c]/sd[c])
	}
	beta := mat.NewVecDense(k, nil)
	beta.MulVec(J, mat.NewVecDense(k, f.X))
	var cov mat.Dense
	if f.Cov != nil {
		cov.Mul(J, f.Cov)
		cov.Mul(&cov, J.T())
	}
	cv := func(i int) float64 {
		if f.Cov == nil {
			return 0
		}
		return cov.At(i, i)
	}
	res.Parameters = append(res.Parameters, effectParam("intercept (logit scale)", beta.AtVec(0), cv(0)))
	for c, name := range covariates {
		res.Parameters = append(res.Parameters, effectParam("effect of "+name+" (logit scale, per unit)", beta.AtVec(1+c), cv(1+c)))
	}
	if timeEffects {
		for j := 1; j < t; j++ {
			res.Parameters = append(res.Parameters, effectParam(fmt.Sprintf("occasion %d effect (logit scale, relative to occasion 1)", j+1), beta.AtVec(nc+j), cv(nc+j)))
		}
	}
	for _, p := range res.Parameters {
		if math.Abs(p.Estimate) > 15 {
			res.Boundary = true
			res.Warnings = append(res.Warnings, fmt.Sprintf("%s is very large (%.3g): a capture probability is estimated near 0 or 1", p.Name, p.Estimate))
		}
	}
	return res, nil
}

// newHugginsEval validates the covariates, standardises them and groups
// animals sharing history, loss flag and covariate values.
func newHugginsEval(method string, h *estimators.Histories, covariates []string, timeEffects bool) (*hugginsEval, *captureStats, []float64, []float64, error) {
	st, err := summarise(method, h, 2)
	if err != nil {
		return nil, nil, nil, nil, err
	}
	t := st.t
	nc := len(covariates)
	mean := make([]float64, nc)
	sd := make([]float64, nc)
	seen := map[string]bool{}
	for k, name := range covariates {
		if seen[name] {
			return nil, nil, nil, nil, fmt.Errorf("closed %s: %w: covariate %q named twice", method, estimators.ErrInvalidInput, name)
		}
		seen[name] = true
		v, ok := h.Covariates[name]
		if !ok {
			return nil, nil, nil, nil, fmt.Errorf("closed %s: %w: no covariate %q in the data", method, estimators.ErrInvalidInput, name)
		}
		for i, z := range v {
			if math.IsNaN(z) || math.IsInf(z, 0) {
				return nil, nil, nil, nil, fmt.Errorf("closed %s: %w: covariate %q of animal %d is not a finite number", method, estimators.ErrInvalidInput, name, i+1)
			}
			mean[k] += z
		}
		mean[k] /= float64(len(v))
		for _, z := range v {
			sd[k] += (z - mean[k]) * (z - mean[k])
		}
		sd[k] = math.Sqrt(sd[k] / float64(len(v)))
		if !(sd[k] > 0) {
			return nil, nil, nil, nil, fmt.Errorf("closed %s: %w: covariate %q has the same value for every animal, so its effect cannot be estimated", method, estimators.ErrInvalidInput, name)
		}
	}

	// Group animals that share a history, loss flag and covariate values.
	type key struct {
		hist string
		cov  string
	}
	index := map[key]int{}
	var rows []hugginsRow
	hb := make([]byte, t+1)
	var cb strings.Builder
	for i, row := range h.Caught {
		for j, c := range row {
			hb[j] = '0'
			if c {
				hb[j] = '1'
			}
		}
		lost := h.Removed != nil && h.Removed[i]
		hb[t] = '.'
		if lost {
			hb[t] = 'x'
		}
		cb.Reset()
		z := make([]float64, nc)
		for k, name := range covariates {
			z[k] = (h.Covariates[name][i] - mean[k]) / sd[k]
			fmt.Fprintf(&cb, "%x,", math.Float64bits(h.Covariates[name][i]))
		}
		kk := key{string(hb), cb.String()}
		if idx, ok := index[kk]; ok {
			rows[idx].count++
			continue
		}
		r := hugginsRow{z: z, count: 1, avail: t, lost: lost}
		for j, c := range row {
			if c {
				r.caughtAt = append(r.caughtAt, j)
				r.last = j
			}
		}
		if lost {
			r.avail = r.last + 1
		}
		index[kk] = len(rows)
		rows = append(rows, r)
	}

	ev := &hugginsEval{rows: rows, t: t, nc: nc, time: timeEffects, eta: make([]float64, t), p: make([]float64, t)}
	return ev, st, mean, sd, nil
}

// hugginsLabel names the model's predictors, e.g. "t + mass + male" or ".".
func hugginsLabel(covariates []string, timeEffects bool) string {
	var parts []string
	if timeEffects {
		parts = append(parts, "t")
	}
	c := append([]string(nil), covariates...)
	sort.Strings(c)
	parts = append(parts, c...)
	if len(parts) == 0 {
		return "."
	}
	return strings.Join(parts, " + ")
}

// hugginsRow is one group of animals sharing history, loss flag and
// covariate values (z standardised).
type hugginsRow struct {
	z        []float64
	caughtAt []int
	last     int
	avail    int // occasions at which the animal could be caught
	lost     bool
	count    float64
}

// hugginsEval evaluates the conditional log-likelihood over grouped rows.
// Working parameters: x[0] intercept, x[1..nc] standardised covariate
// effects, then α_2..α_t when time effects are on.
type hugginsEval struct {
	rows   []hugginsRow
	t, nc  int
	time   bool
	eta, p []float64
}

// fill sets eta[j] and p[j] for row r.
func (e *hugginsEval) fill(x []float64, r *hugginsRow) {
	base := x[0]
	for c := 0; c < e.nc; c++ {
		base += x[1+c] * r.z[c]
	}
	for j := 0; j < e.t; j++ {
		eta := base
		if e.time && j > 0 {
			eta += x[e.nc+j]
		}
		e.eta[j] = eta
		e.p[j] = estimators.Expit(eta)
	}
}

func (e *hugginsEval) ll(x []float64) float64 { return e.eval(x, nil) }

func (e *hugginsEval) grad(g, x []float64) { e.eval(x, g) }

// eval returns the conditional log-likelihood and, when g is not nil, its
// gradient: ∂ℓ_i/∂η_ij = x_ij − a_ij p_ij − Q_i p_ij/(1 − Q_i), with a_ij
// whether the animal was available and Q_i = Π_j (1 − p_ij).
func (e *hugginsEval) eval(x []float64, g []float64) float64 {
	if g != nil {
		for i := range g {
			g[i] = 0
		}
	}
	if !e.time {
		return e.evalConstant(x, g)
	}
	v := 0.0
	for ri := range e.rows {
		r := &e.rows[ri]
		e.fill(x, r)
		lq, lqAvail := 0.0, 0.0
		for j := 0; j < e.t; j++ {
			sp := softplus(e.eta[j])
			lq -= sp
			if j < r.avail {
				lqAvail -= sp
			}
		}
		li := lqAvail
		for _, j := range r.caughtAt {
			li += e.eta[j]
		}
		lpstar := math.Log(-math.Expm1(lq))
		v += r.count * (li - lpstar)
		if g == nil {
			continue
		}
		q := math.Exp(lq)
		ratio := q / -math.Expm1(lq)
		ci := 0
		for j := 0; j < e.t; j++ {
			d := -ratio * e.p[j]
			if j < r.avail {
				d -= e.p[j]
			}
			if ci < len(r.caughtAt) && r.caughtAt[ci] == j {
				d++
				ci++
			}
			d *= r.count
			g[0] += d
			for c := 0; c < e.nc; c++ {
				g[1+c] += d * r.z[c]
			}
			if e.time && j > 0 {
				g[e.nc+j] += d
			}
		}
	}
	return v
}

// evalConstant is eval without time effects: p_i is the same on every
// occasion, so each row costs O(1): with k captures out of a available
// occasions, ℓ_i = k η_i − a softplus(η_i) − ln(1 − (1−p_i)^t) and
// ∂ℓ_i/∂η_i = k − a p_i − t p_i Q_i/(1 − Q_i).
func (e *hugginsEval) evalConstant(x []float64, g []float64) float64 {
	v := 0.0
	tf := float64(e.t)
	for ri := range e.rows {
		r := &e.rows[ri]
		eta := x[0]
		for c := 0; c < e.nc; c++ {
			eta += x[1+c] * r.z[c]
		}
		sp := softplus(eta)
		lq := -tf * sp
		k, a := float64(len(r.caughtAt)), float64(r.avail)
		v += r.count * (k*eta - a*sp - math.Log(-math.Expm1(lq)))
		if g == nil {
			continue
		}
		p := estimators.Expit(eta)
		d := r.count * (k - a*p - tf*p*math.Exp(lq)/-math.Expm1(lq))
		g[0] += d
		for c := 0; c < e.nc; c++ {
			g[1+c] += d * r.z[c]
		}
	}
	return v
}
