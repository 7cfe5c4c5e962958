package closed

import (
	"math"

	"tagtally/estimators"
)

// Mh fits model Mh (Otis et al. 1978) as Pledger's (2000) two-point finite
// mixture: each animal belongs to class 1 (proportion w) with capture
// probability p1 or class 2 (proportion 1 − w) with p2, the same on every
// occasion. The likelihood uses only the capture frequencies f_k (animals
// caught k times; with losses on capture, k times out of the T occasions
// at which the animal was available):
//
//	lnL = lnΓ(N+1) − lnΓ(N−Mt1+1) + Σ_{k,T} f_{k,T} ln π(k,T) + (N−Mt1) ln π(0,t)
//	π(k,T) = w p1^k (1−p1)^(T−k) + (1−w) p2^k (1−p2)^(T−k)
//
// (Pledger 2000, model Mh2), the probability of one individual history with
// k captures, so the value is comparable with M0, Mt and Mb. K = 4; at least
// 4 occasions. Classes are reported with class 1 the less catchable.
//
// Degenerate cases: when the data show no heterogeneity the two classes
// merge (p1 = p2 or w at 0 or 1), the information matrix is singular and
// SEs are reported as 0 with a warning; when the likelihood keeps rising
// with N (common for Mh with few recaptures) an error wrapping
// ErrNotConverged is returned.
func Mh(h *estimators.Histories) (*estimators.Result, error) {
	return fitModel(mhModel(h))
}

// mhModel builds Mh's likelihood and its starting points.
func mhModel(h *estimators.Histories) (*model, [][]float64, error) {
	st, err := summarise("Mh", h, 4)
	if err != nil {
		return nil, nil, err
	}
	tf := float64(st.t)
	m := &model{
		method: "Mh", st: st, k: 4,
		ll: func(x []float64) float64 {
			f0 := math.Exp(x[0])
			a1, a2 := x[1], x[2]
			lw1, lw2 := -softplus(-x[3]), -softplus(x[3]) // ln w, ln(1−w)
			lp1, lq1 := -softplus(-a1), -softplus(a1)     // ln p1, ln(1−p1)
			lp2, lq2 := -softplus(-a2), -softplus(a2)
			v := nTerm(st.mt1, f0)
			for _, c := range st.freq {
				k, r := float64(c.k), float64(c.trials-c.k)
				v += c.count * logSumExp(lw1+k*lp1+r*lq1, lw2+k*lp2+r*lq2)
			}
			if f0 > 0 {
				v += f0 * logSumExp(lw1+tf*lq1, lw2+tf*lq2)
			}
			return v
		},
		params: func(x []float64, cov func(i, j int) float64) []estimators.Named {
			lo, hi, wIdx, wSign := 1, 2, 3, 1.0
			if x[1] > x[2] {
				lo, hi, wSign = 2, 1, -1
			}
			return []estimators.Named{
				probParam("p(class 1, less catchable)", x[lo], cov(lo, lo)),
				probParam("p(class 2, more catchable)", x[hi], cov(hi, hi)),
				probParam("proportion in class 1", wSign*x[wIdx], cov(wIdx, wIdx)),
			}
		},
		assumptions: []string{
			assumeClose, assumeMarks, assumeIndep,
			"Animals differ in catchability: each belongs to one of two hidden classes with its own capture probability, constant over occasions and unchanged by being caught (a two-point mixture standing in for any spread of catchability).",
		},
		references: []string{refOtis, refPledger, refVenzon},
	}
	m.profile = func(f0 float64, warm []float64) (float64, []float64, error) {
		return profileByOptimisation(m, f0, warm)
	}
	// Mixture likelihoods can have several local maxima: start from a few
	// spreads around the M0 capture probability and keep the best fit.
	f0 := startF0(st)
	p0 := st.total / (st.trials + tf*f0)
	var starts [][]float64
	for _, s := range [][4]float64{{1.5, 0.5, 2, 0.5}, {1.5, 0.3, 1.5, 0.7}, {1.5, 0.7, 3, 0.85}, {4, 0.2, 1.5, 0.6}} {
		starts = append(starts, []float64{math.Log(s[0]*f0 + 1), clampedLogit(p0 * s[1]), clampedLogit(math.Min(0.95, p0*s[2])), estimators.Logit(s[3])})
	}
	return m, starts, nil
}

// Mth fits model Mth (Otis et al. 1978) as Pledger's (2000) two-point
// mixture with time effects and no interaction (her Mth2): on the logit
// scale, class 1 has capture probability α_j on occasion j and class 2 has
// α_j + δ, with class-1 proportion w:
//
//	lnL = lnΓ(N+1) − lnΓ(N−Mt1+1) + Σ_ω n_ω ln π_ω + (N−Mt1) ln π_0
//	π_ω = Σ_c w_c Π_j p_cj^x_j (1−p_cj)^(1−x_j)   (over occasions available)
//
// with n_ω the animals sharing history ω. The likelihood is evaluated from
// the captures per occasion and the capture frequencies (by loss occasion),
// which are sufficient for it (see mthEval), so its cost grows with the
// occasions, not the animals. K = t + 3; at least 3 occasions. Identifiable
// when the classes differ (δ ≠ 0 and 0 < w < 1); otherwise it reduces to Mt
// and the information matrix is singular (SEs 0, with a warning).
func Mth(h *estimators.Histories) (*estimators.Result, error) {
	return fitModel(mthModel(h))
}

// mthModel builds Mth's likelihood and its starting points.
func mthModel(h *estimators.Histories) (*model, [][]float64, error) {
	st, err := summarise("Mth", h, 3)
	if err != nil {
		return nil, nil, err
	}
	t := st.t
	ev := newMthEval(st)
	m := &model{
		method: "Mth", st: st, k: t + 3,
		ll:   func(x []float64) float64 { return ev.eval(x, nil) },
		grad: func(g, x []float64) { ev.eval(x, g) },
		params: func(x []float64, cov func(i, j int) float64) []estimators.Named {
			d := t + 1
			// Report class 1 as the less catchable one: if δ > 0 class 1
			// (α_j) is already lower.
			out := make([]estimators.Named, 0, 2*t+2)
			lowIsFirst := x[d] > 0
			for j := 0; j < t; j++ {
				i := j + 1
				first := probParam(occasionName("p", j)+"(class with α)", x[i], cov(i, i))
				second := probParam(occasionName("p", j)+"(class with α+δ)", x[i]+x[d], cov(i, i)+cov(d, d)+2*cov(i, d))
				if lowIsFirst {
					first.Name, second.Name = occasionName("p", j)+"(class 1, less catchable)", occasionName("p", j)+"(class 2, more catchable)"
					out = append(out, first, second)
				} else {
					first.Name, second.Name = occasionName("p", j)+"(class 2, more catchable)", occasionName("p", j)+"(class 1, less catchable)"
					out = append(out, second, first)
				}
			}
			w := probParam("proportion in class 1", x[t+2], cov(t+2, t+2))
			if !lowIsFirst {
				w = probParam("proportion in class 1", -x[t+2], cov(t+2, t+2))
			}
			out = append(out, w, effectParam("class difference δ (logit scale)", math.Abs(x[d]), cov(d, d)))
			return out
		},
		assumptions: []string{
			assumeClose, assumeMarks, assumeIndep,
			"Capture probability varies between occasions and between animals: each animal belongs to one of two hidden classes, and the classes differ by the same amount on the logit scale on every occasion; being caught does not change it.",
		},
		references: []string{refOtis, refPledger, refVenzon},
	}
	m.profile = func(f0 float64, warm []float64) (float64, []float64, error) {
		return profileByOptimisation(m, f0, warm)
	}
	f0 := startF0(st)
	var starts [][]float64
	for _, spread := range []float64{1.5, 3} {
		x0 := make([]float64, t+3)
		x0[0] = math.Log(1.5*f0 + 1)
		for j := 0; j < t; j++ {
			x0[j+1] = clampedLogit((st.n[j]+0.5)/(st.avail[j]+f0+1)) - spread/2
		}
		x0[t+1] = spread
		x0[t+2] = estimators.Logit(0.6)
		starts = append(starts, x0)
	}
	return m, starts, nil
}

// mthEval evaluates the Mth log-likelihood and its gradient from
// sufficient statistics. For class c the log-probability of a history ω is
//
//	Σ_{j available} ln(1−p_cj) + Σ_{j caught} logit p_cj
//
// and logit p_2j = logit p_1j + δ, so the caught-occasion sum of class 2 is
// that of class 1 plus δ·k_ω (k_ω captures). Factoring out the class-1 sum,
//
//	Σ_ω n_ω ln π_ω = Σ_j n_j α_j + Σ_g n_g ln Σ_c w_c exp(A_cg + [c=2] δ k_g)
//
// where g runs over the groups of animals with the same number of captures
// k_g and the same availability (caught to the end, or lost on capture at
// occasion L), and A_cg = Σ_{j available} ln(1−p_cj). The captures per
// occasion n_j and these groups are sufficient (the Rasch-model property of
// Mth without interaction), so each evaluation costs O(t) per group, at
// most t groups of animals never lost and t² of lost ones, whatever the
// number of animals or distinct histories.
type mthEval struct {
	st      *captureStats
	groups  []mthGroup
	lq      [2][]float64
	prefix  [2][]float64 // prefix[c][j] = Σ_{i<=j} ln(1−p_ci)
	p       [2][]float64
	eta     [2][]float64
	lostW   [2][]float64 // Σ count·r_c of lost groups by last occasion
	nCaught []float64
}

// mthGroup is the animals with k captures that were available to the end
// (lost false) or lost on capture at occasion last.
type mthGroup struct {
	k     float64
	lost  bool
	last  int
	count float64
}

func newMthEval(st *captureStats) *mthEval {
	e := &mthEval{st: st, nCaught: st.n}
	type key struct {
		k, last int
		lost    bool
	}
	index := map[key]int{}
	for _, p := range st.patterns {
		k := 0
		for _, c := range p.caught {
			if c {
				k++
			}
		}
		kk := key{k: k, lost: p.lost}
		if p.lost {
			kk.last = p.last
		}
		i, ok := index[kk]
		if !ok {
			i = len(e.groups)
			index[kk] = i
			e.groups = append(e.groups, mthGroup{k: float64(k), lost: p.lost, last: kk.last})
		}
		e.groups[i].count += p.count
	}
	t := st.t
	for c := 0; c < 2; c++ {
		e.lq[c] = make([]float64, t)
		e.prefix[c] = make([]float64, t)
		e.p[c] = make([]float64, t)
		e.eta[c] = make([]float64, t)
		e.lostW[c] = make([]float64, t)
	}
	return e
}

// eval returns lnL at x = (ln f0, α_1..α_t, δ, logit w) and, when g is not
// nil, fills g with the gradient.
func (e *mthEval) eval(x []float64, g []float64) float64 {
	st := e.st
	t := st.t
	f0 := math.Exp(x[0])
	delta, omega := x[t+1], x[t+2]
	w := estimators.Expit(omega)
	lw := [2]float64{-softplus(-omega), -softplus(omega)}
	for c := 0; c < 2; c++ {
		acc := 0.0
		for j := 0; j < t; j++ {
			eta := x[j+1]
			if c == 1 {
				eta += delta
			}
			e.eta[c][j] = eta
			e.lq[c][j] = -softplus(eta)
			e.p[c][j] = estimators.Expit(eta)
			acc += e.lq[c][j]
			e.prefix[c][j] = acc
			e.lostW[c][j] = 0
		}
	}
	v := nTerm(st.mt1, f0)
	for j := 0; j < t; j++ {
		v += e.nCaught[j] * e.eta[0][j]
	}
	// R[c]: Σ count·r_c over animals available on every occasion
	// (including the f0 unseen animals); K2: Σ count·r_2·captures.
	var R [2]float64
	K2 := 0.0
	for i := range e.groups {
		gr := &e.groups[i]
		var l [2]float64
		for c := 0; c < 2; c++ {
			base := e.prefix[c][t-1]
			if gr.lost {
				base = e.prefix[c][gr.last]
			}
			l[c] = lw[c] + base
		}
		l[1] += delta * gr.k
		lse := logSumExp(l[0], l[1])
		v += gr.count * lse
		if g == nil {
			continue
		}
		r1 := math.Exp(l[0] - lse)
		r := [2]float64{r1, 1 - r1}
		for c := 0; c < 2; c++ {
			if gr.lost {
				e.lostW[c][gr.last] += gr.count * r[c]
			} else {
				R[c] += gr.count * r[c]
			}
		}
		K2 += gr.count * r[1] * gr.k
	}
	l0 := [2]float64{lw[0] + e.prefix[0][t-1], lw[1] + e.prefix[1][t-1]}
	lse0 := logSumExp(l0[0], l0[1])
	if f0 > 0 {
		v += f0 * lse0
	}
	if g == nil {
		return v
	}
	r0 := math.Exp(l0[0] - lse0)
	g[0] = f0 * (nTermDf0(st.mt1, f0) + lse0)
	R[0] += f0 * r0
	R[1] += f0 * (1 - r0)
	// Weight of class c among animals still available at j: R[c] plus
	// lost groups whose last capture is at j or later.
	var tail [2]float64
	gd := K2
	for j := t - 1; j >= 0; j-- {
		tail[0] += e.lostW[0][j]
		tail[1] += e.lostW[1][j]
		a0, a1 := R[0]+tail[0], R[1]+tail[1]
		g[j+1] = e.nCaught[j] - a0*e.p[0][j] - a1*e.p[1][j]
		gd -= a1 * e.p[1][j]
	}
	g[t+1] = gd
	// d/dω: Σ count (r_1 − w) over animals and the f0 unseen ones.
	total := float64(st.mt1) + f0
	class1 := R[0]
	for j := 0; j < t; j++ {
		class1 += e.lostW[0][j]
	}
	g[t+2] = class1 - w*total
	return v
}

// logSumExp is ln(e^a + e^b) without overflow.
func logSumExp(a, b float64) float64 {
	if a < b {
		a, b = b, a
	}
	if math.IsInf(a, -1) {
		return a
	}
	return a + math.Log1p(math.Exp(b-a))
}
