package closed

import (
	"math"

	"tagtally/estimators"
)

// M0 fits model M0 of Otis et al. (1978): one capture probability p for
// every animal and occasion. With f0 = N − Mt1 animals never caught,
// n. captures in all and T. the occasions at which the caught animals were
// available (t·Mt1 unless some were lost on capture),
//
//	lnL(N, p) = lnΓ(N+1) − lnΓ(N−Mt1+1) + n. ln p + (T. − n. + t·f0) ln(1−p)
//
// (Otis et al. 1978, the M0 likelihood; the multinomial constant over
// distinct histories is left out, as in every model here). With nothing
// lost on capture, N̂ lies within one animal of the root of the published
// equation Mt1 = N[1 − (1 − n./(tN))^t], which treats N as a whole number;
// here N is continuous. K = 2.
//
// N's SE comes from the observed information on the ln(N − Mt1) scale by
// the delta method; its 95% interval is the profile-likelihood interval,
// never below Mt1. LogLik leaves out the multinomial constant over
// distinct histories, the same in every full-likelihood model here, so
// their AICc values compare; SampleSize for AICc is Mt1 (see
// likelihood.go for both choices). Degenerate cases: no recaptures gives
// ErrNoRecaptures; fewer than 2 occasions ErrTooFewOccasions; every animal
// caught every time a boundary result N = Mt1, p = 1.
func M0(h *estimators.Histories) (*estimators.Result, error) {
	return fitModel(m0Model(h))
}

// m0Model builds M0's likelihood and its starting points.
func m0Model(h *estimators.Histories) (*model, [][]float64, error) {
	st, err := summarise("M0", h, 2)
	if err != nil {
		return nil, nil, err
	}
	tf := float64(st.t)
	s, fc := st.total, st.trials-st.total // successes, failures among caught animals
	m := &model{
		method: "M0", st: st, k: 2,
		ll: func(x []float64) float64 {
			f0 := math.Exp(x[0])
			return nTerm(st.mt1, f0) + binLL(s, fc+tf*f0, x[1])
		},
		params: func(x []float64, cov func(i, j int) float64) []estimators.Named {
			return []estimators.Named{probParam("p", x[1], cov(1, 1))}
		},
		assumptions: []string{
			assumeClose, assumeMarks, assumeIndep,
			"Every animal has the same capture probability on every occasion: no change over time, no response to being caught, no differences between animals.",
		},
		references: []string{refOtis, refVenzon},
	}
	m.profile = func(f0 float64, _ []float64) (float64, []float64, error) {
		f := fc + tf*f0
		p := s / (s + f)
		return nTerm(st.mt1, f0) + xlogy(s, p) + xlogy(f, 1-p), []float64{estimators.Logit(p)}, nil
	}
	f0 := startF0(st)
	return m, [][]float64{[]float64{math.Log(f0), estimators.Logit(s / (s + fc + tf*f0))}}, nil
}

// Mt fits model Mt of Otis et al. (1978) (Darroch 1958): a capture
// probability p_j for each occasion, the same for every animal.
//
//	lnL = lnΓ(N+1) − lnΓ(N−Mt1+1) + Σ_j [n_j ln p_j + (a_j + f0 − n_j) ln(1−p_j)]
//
// where n_j is the number caught on occasion j and a_j the number of caught
// animals still available then (Mt1 unless some were lost on capture
// earlier). Without losses N̂ lies within one animal of the root of
// Darroch's (1958) equation 1 − Mt1/N = Π_j (1 − n_j/N) (whole-number N
// there, continuous N here). K = t + 1. An occasion on which nothing was
// caught has p_j at 0, a boundary that is flagged.
//
// SE, interval and degenerate cases as for M0.
func Mt(h *estimators.Histories) (*estimators.Result, error) {
	return fitModel(mtModel(h))
}

// mtModel builds Mt's likelihood and its starting points.
func mtModel(h *estimators.Histories) (*model, [][]float64, error) {
	st, err := summarise("Mt", h, 2)
	if err != nil {
		return nil, nil, err
	}
	t := st.t
	m := &model{
		method: "Mt", st: st, k: t + 1,
		ll: func(x []float64) float64 {
			f0 := math.Exp(x[0])
			v := nTerm(st.mt1, f0)
			for j := 0; j < t; j++ {
				v += binLL(st.n[j], st.avail[j]+f0-st.n[j], x[j+1])
			}
			return v
		},
		params: func(x []float64, cov func(i, j int) float64) []estimators.Named {
			out := make([]estimators.Named, t)
			for j := 0; j < t; j++ {
				out[j] = probParam(occasionName("p", j), x[j+1], cov(j+1, j+1))
			}
			return out
		},
		assumptions: []string{
			assumeClose, assumeMarks, assumeIndep,
			"Capture probability may differ between occasions but is the same for every animal on a given occasion, whether or not it was caught before.",
		},
		references: []string{refOtis, refDarroch, refVenzon},
	}
	m.profile = func(f0 float64, _ []float64) (float64, []float64, error) {
		v := nTerm(st.mt1, f0)
		x := make([]float64, t)
		for j := 0; j < t; j++ {
			a := st.avail[j] + f0
			p := st.n[j] / a
			v += xlogy(st.n[j], p) + xlogy(a-st.n[j], 1-p)
			x[j] = clampedLogit(p)
		}
		return v, x, nil
	}
	f0 := startF0(st)
	x0 := make([]float64, t+1)
	x0[0] = math.Log(f0)
	for j := 0; j < t; j++ {
		x0[j+1] = clampedLogit((st.n[j] + 0.5) / (st.avail[j] + f0 + 1))
	}
	return m, [][]float64{x0}, nil
}

// Mb fits model Mb of Otis et al. (1978): a first-capture probability p
// and a recapture probability c for animals caught before (a permanent
// behavioural response to capture: "trap-happy" when c > p, "trap-shy"
// when c < p).
//
//	lnL = lnΓ(N+1) − lnΓ(N−Mt1+1) + Mt1 ln p + Σ_j (N − M_{j+1}) ln(1−p)
//	      + m. ln c + (Σ_j K_j − m.) ln(1−c)
//
// with M_{j+1} the distinct animals caught by the end of occasion j, m.
// all recaptures and K_j the marked animals available on occasion j. N
// depends only on the first captures (a removal-type estimate), so it is
// finite only when first captures decline over the occasions; otherwise an
// error wrapping ErrNotConverged says the data do not bound N. K = 3.
func Mb(h *estimators.Histories) (*estimators.Result, error) {
	return fitModel(mbModel(h))
}

// mbModel builds Mb's likelihood and its starting points.
func mbModel(h *estimators.Histories) (*model, [][]float64, error) {
	st, err := summarise("Mb", h, 2)
	if err != nil {
		return nil, nil, err
	}
	tf := float64(st.t)
	mt1 := float64(st.mt1)
	failCaught := 0.0 // Σ_j (Mt1 − M_{j+1}): caught animals not yet caught at j
	recapTrials, recaps := 0.0, 0.0
	for j := 0; j < st.t; j++ {
		failCaught += mt1 - (st.before[j] + st.u[j])
		recapTrials += st.marked[j]
		recaps += st.m[j]
	}
	m := &model{
		method: "Mb", st: st, k: 3,
		ll: func(x []float64) float64 {
			f0 := math.Exp(x[0])
			return nTerm(st.mt1, f0) + binLL(mt1, failCaught+tf*f0, x[1]) + binLL(recaps, recapTrials-recaps, x[2])
		},
		params: func(x []float64, cov func(i, j int) float64) []estimators.Named {
			return []estimators.Named{probParam("p", x[1], cov(1, 1)), probParam("c", x[2], cov(2, 2))}
		},
		assumptions: []string{
			assumeClose, assumeMarks, assumeIndep,
			"Every animal has the same first-capture probability p on every occasion; after its first capture its recapture probability is c, the same for all animals and occasions (a lasting response to being caught).",
		},
		references: []string{refOtis, refVenzon},
	}
	c := recaps / recapTrials
	m.profile = func(f0 float64, _ []float64) (float64, []float64, error) {
		f := failCaught + tf*f0
		p := mt1 / (mt1 + f)
		v := nTerm(st.mt1, f0) + xlogy(mt1, p) + xlogy(f, 1-p) + xlogy(recaps, c) + xlogy(recapTrials-recaps, 1-c)
		return v, []float64{estimators.Logit(p), clampedLogit(c)}, nil
	}
	f0 := startF0(st)
	return m, [][]float64{[]float64{math.Log(f0), estimators.Logit(mt1 / (mt1 + failCaught + tf*f0)), clampedLogit((recaps + 0.5) / (recapTrials + 1))}}, nil
}

// Mtb fits model Mtb (Otis et al. 1978): first-capture probabilities p_j
// that vary by occasion and a behavioural response to capture. Otis et al.
// (1978) noted that Mtb with a free recapture probability for every
// occasion is not identifiable; here it is made identifiable by the
// constraint that the behavioural response is the same on every occasion
// on the logit scale,
//
//	logit c_j = logit p_j + b,
//
// the form a "caught before" covariate takes in the logistic models of
// Huggins (1989) (from memory). Then
//
//	lnL = lnΓ(N+1) − lnΓ(N−Mt1+1) + Σ_j [u_j ln p_j + (N − M_{j+1}) ln(1−p_j)]
//	      + Σ_j [m_j ln c_j + (K_j − m_j) ln(1−c_j)]
//
// with u_j first captures, m_j recaptures and K_j the marked animals
// available on occasion j. K = t + 2; at least 3 occasions. N is often
// poorly determined under Mtb: read the profile interval, and expect the
// error for an unbounded likelihood when first captures do not decline.
func Mtb(h *estimators.Histories) (*estimators.Result, error) {
	return fitModel(mtbModel(h))
}

// mtbModel builds Mtb's likelihood and its starting points.
func mtbModel(h *estimators.Histories) (*model, [][]float64, error) {
	st, err := summarise("Mtb", h, 3)
	if err != nil {
		return nil, nil, err
	}
	t := st.t
	mt1 := float64(st.mt1)
	notYet := make([]float64, t) // caught animals not yet caught by the end of j: Mt1 − M_{j+1}
	for j := 0; j < t; j++ {
		notYet[j] = mt1 - (st.before[j] + st.u[j])
	}
	m := &model{
		method: "Mtb", st: st, k: t + 2,
		ll: func(x []float64) float64 {
			f0 := math.Exp(x[0])
			b := x[t+1]
			v := nTerm(st.mt1, f0)
			for j := 0; j < t; j++ {
				v += binLL(st.u[j], notYet[j]+f0, x[j+1])
				if st.marked[j] > 0 {
					v += binLL(st.m[j], st.marked[j]-st.m[j], x[j+1]+b)
				}
			}
			return v
		},
		// d/dη of s ln p + f ln(1−p) is s − (s+f)p; d/df0 of the
		// first-capture terms is ln(1−p_j) each; the chain rule gives
		// f0 times that for x[0] = ln f0.
		grad: func(g, x []float64) {
			f0 := math.Exp(x[0])
			b := x[t+1]
			g0 := nTermDf0(st.mt1, f0)
			gb := 0.0
			for j := 0; j < t; j++ {
				eta := x[j+1]
				g0 -= softplus(eta)
				gj := st.u[j] - (st.u[j]+notYet[j]+f0)*estimators.Expit(eta)
				if st.marked[j] > 0 {
					d := st.m[j] - st.marked[j]*estimators.Expit(eta+b)
					gj += d
					gb += d
				}
				g[j+1] = gj
			}
			g[0] = f0 * g0
			g[t+1] = gb
		},
		params: func(x []float64, cov func(i, j int) float64) []estimators.Named {
			out := make([]estimators.Named, 0, 2*t+1)
			for j := 0; j < t; j++ {
				out = append(out, probParam(occasionName("p", j), x[j+1], cov(j+1, j+1)))
			}
			for j := 1; j < t; j++ {
				// var(η_j + b) = var η_j + var b + 2 cov(η_j, b)
				out = append(out, probParam(occasionName("c", j), x[j+1]+x[t+1], cov(j+1, j+1)+cov(t+1, t+1)+2*cov(j+1, t+1)))
			}
			return append(out, effectParam("behaviour effect (logit scale, recapture vs first capture)", x[t+1], cov(t+1, t+1)))
		},
		assumptions: []string{
			assumeClose, assumeMarks, assumeIndep,
			"First-capture probability may differ between occasions; once caught, an animal's capture probability shifts by the same amount on the logit scale on every later occasion (a lasting response to being caught, constant over time). The same for every animal.",
		},
		references: []string{refOtis, refHuggins, refVenzon},
	}
	m.profile = func(f0 float64, warm []float64) (float64, []float64, error) {
		return profileByOptimisation(m, f0, warm)
	}
	f0 := startF0(st)
	x0 := make([]float64, t+2)
	x0[0] = math.Log(f0)
	recaps, recapTrials, firsts, firstTrials := 0.0, 0.0, 0.0, 0.0
	for j := 0; j < t; j++ {
		x0[j+1] = clampedLogit((st.u[j] + 0.5) / (st.u[j] + notYet[j] + f0 + 1))
		recaps += st.m[j]
		recapTrials += st.marked[j]
		firsts += st.u[j]
		firstTrials += st.u[j] + notYet[j] + f0
	}
	x0[t+1] = clampedLogit((recaps+0.5)/(recapTrials+1)) - clampedLogit(firsts/firstTrials)
	return m, [][]float64{x0}, nil
}

// clampedLogit is logit(p) with p kept inside [1e-9, 1 − 1e-9], for
// starting values and closed-form profile maximisers where p may be 0 or 1.
func clampedLogit(p float64) float64 {
	return estimators.Logit(math.Min(math.Max(p, 1e-9), 1-1e-9))
}
