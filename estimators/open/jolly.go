package open

import (
	"fmt"
	"math"

	"tagtally/estimators"
)

// JollyOccasion is the Jolly-Seber estimate for one occasion. A field is
// nil where the method gives no estimate for that occasion (M, N and p
// exist for occasions 2..T-1, phi for 1..T-2, B for 2..T-2) or where the
// data cannot support one (Notes says which and why). A Value whose SE
// could not be computed has SE 0, an interval of kind "not available",
// and a note.
type JollyOccasion struct {
	// Occasion is numbered from 1.
	Occasion int `json:"occasion"`
	// The summary counts n_i, m_i, R_i, r_i, z_i.
	Caught      int `json:"n"`
	Marked      int `json:"m"`
	Released    int `json:"R"`
	Recaptured  int `json:"r"`
	MissedAlive int `json:"z"`
	// M is the number of marked animals alive just before the occasion.
	M *estimators.Value `json:"M"`
	// N is the population size at the occasion.
	N *estimators.Value `json:"N"`
	// Phi is the probability of surviving (and staying) from this occasion
	// to the next.
	Phi *estimators.Value `json:"phi"`
	// B is the number of animals that joined between this occasion and the
	// next and were alive at the next.
	B *estimators.Value `json:"B"`
	// P is the capture probability at the occasion.
	P *estimators.Value `json:"p"`
	// Notes about degenerate cells and estimates out of range.
	Notes []string `json:"notes,omitempty"`
}

// JollySeberResult is the Jolly-Seber table, one row per occasion.
type JollySeberResult struct {
	Method    string          `json:"method"`
	Occasions []JollyOccasion `json:"occasions"`
	// Variances says which variance formulas were used.
	Variances   string   `json:"variances"`
	Assumptions []string `json:"assumptions"`
	// Warnings repeats every occasion's notes, prefixed by the occasion.
	Warnings   []string `json:"warnings,omitempty"`
	References []string `json:"references"`
}

// Validate checks that the summary is internally consistent: equal
// lengths, no negative counts, m_i <= n_i, R_i <= n_i, r_i <= R_i.
func (s Summary) Validate() error {
	t := len(s.Caught)
	if t == 0 {
		return fmt.Errorf("summary: %w: no occasions", estimators.ErrNoData)
	}
	if len(s.Marked) != t || len(s.Released) != t || len(s.Recaptured) != t || len(s.MissedAlive) != t {
		return fmt.Errorf("summary: %w: the per-occasion counts have different lengths", estimators.ErrInvalidInput)
	}
	for i := 0; i < t; i++ {
		n, m, r, rr, z := s.Caught[i], s.Marked[i], s.Released[i], s.Recaptured[i], s.MissedAlive[i]
		switch {
		case n < 0 || m < 0 || r < 0 || rr < 0 || z < 0:
			return fmt.Errorf("summary: %w: negative count on occasion %d", estimators.ErrInvalidInput, i+1)
		case m > n:
			return fmt.Errorf("summary: %w: occasion %d has %d marked among %d caught", estimators.ErrInvalidInput, i+1, m, n)
		case r > n:
			return fmt.Errorf("summary: %w: occasion %d has %d released but %d caught", estimators.ErrInvalidInput, i+1, r, n)
		case rr > r:
			return fmt.Errorf("summary: %w: occasion %d has %d recaught later but %d released", estimators.ErrInvalidInput, i+1, rr, r)
		}
	}
	if s.Marked[0] != 0 || s.MissedAlive[0] != 0 {
		return fmt.Errorf("summary: %w: no animal can carry a mark on the first occasion", estimators.ErrInvalidInput)
	}
	return nil
}

// JollySeber computes the Jolly-Seber estimates (Jolly 1965; Seber 1965)
// in the bias-adjusted forms of Seber (1982, ch. 5) and Pollock et al.
// (1990). With occasions i = 1..T, n_i caught, m_i of them
// marked, R_i released, r_i of the released caught again, z_i known alive
// but missed:
//
//	M_i   = m_i + (R_i + 1) z_i / (r_i + 1)           i = 2..T-1 (M_1 = 0)
//	N_i   = (n_i + 1) M_i / (m_i + 1)                 i = 2..T-1
//	phi_i = M_{i+1} / (M_i - m_i + R_i)               i = 1..T-2
//	B_i   = N_{i+1} - phi_i (N_i - n_i + R_i)         i = 2..T-2
//	p_i   = m_i / M_i                                 i = 2..T-1
//
// Losses on capture enter through R_i < n_i. Variances are the
// large-sample formulas of Jolly (1965) as given by Seber (1982, ch. 5;
// written here from memory and checked by simulation in the tests: the
// mean reported SE matches the spread of the estimates), with the
// estimates put in for the parameters:
//
//	var(M_i)       = (M_i - m_i)(M_i - m_i + R_i)(1/r_i - 1/R_i)
//	var(N_i | N_i) = N_i(N_i - n_i)[(M_i - m_i + R_i)/M_i (1/r_i - 1/R_i) + (1 - a_i)/m_i],  a_i = m_i/n_i
//	var(phi_i)     = phi_i² [ (M_{i+1} - m_{i+1})(M_{i+1} - m_{i+1} + R_{i+1})/M_{i+1}² (1/r_{i+1} - 1/R_{i+1})
//	                 + (M_i - m_i)/(M_i - m_i + R_i) (1/r_i - 1/R_i) + (1 - phi_i)/M_{i+1} ]
//	var(B_i | B_i) = B_i² (M_{i+1} - m_{i+1})(M_{i+1} - m_{i+1} + R_{i+1})/M_{i+1}² (1/r_{i+1} - 1/R_{i+1})
//	                 + (M_i - m_i)/(M_i - m_i + R_i) [phi_i R_i (1 - a_i)/a_i]² (1/r_i - 1/R_i)
//	                 + (N_i - n_i)(N_{i+1} - B_i)(1 - a_i)(1 - phi_i)/(M_i - m_i + R_i)
//	                 + N_{i+1}(N_{i+1} - n_{i+1})(1 - a_{i+1})/m_{i+1} + phi_i² N_i(N_i - n_i)(1 - a_i)/m_i
//
// so N and B carry sampling error only (conditional on the true N_i and
// B_i), while phi includes the binomial survival term. For p the SE comes
// from the delta method on m_i/M_i: var(p_i) = p_i² var(M_i)/M_i² +
// p_i(1 - p_i)/M_i.
//
// Intervals: N and M log-normal with the number caught (n_i, resp. the
// number known marked and alive m_i + z_i) as floor (the construction of
// Chao 1987); phi and p on the logit scale; B normal.
//
// Degenerate cells are flagged, never returned as NaN: r_i = 0 (nobody
// released on occasion i was seen again) leaves M_i resting on the +1
// adjustment and its variance unavailable; m_i = 0 makes the variance of
// N_i unavailable; M_i = 0 (no marked animal at risk) makes N_i and p_i
// inestimable; phi above 1 or B below 0 are reported with a note (the
// moment estimators are not confined to the parameter space). Errors:
// fewer than three occasions (ErrTooFewOccasions), no recaptures at all
// (ErrNoRecaptures), an inconsistent summary (ErrInvalidInput).
func JollySeber(s Summary) (*JollySeberResult, error) {
	return jollySeber(s, true)
}

// JollySeberUnadjusted computes the original moment estimates of Jolly
// (1965), without the +1 small-sample adjustments of JollySeber:
//
//	M_i = m_i + R_i z_i / r_i,   N_i = n_i M_i / m_i,
//
// with phi_i, B_i, p_i and every variance as for JollySeber. These are the
// numbers printed in Jolly (1965) and in the tables that reproduce his
// example, so this form is the one to use to compare with the older
// literature; JollySeber is less biased in small samples (Seber 1982,
// ch. 5) and is the one to report. Without the adjustment r_i = 0 with
// z_i > 0 leaves M_i (and so N_i, p_i, phi_{i-1}, phi_i and the B's that
// use them) inestimable, and m_i = 0 leaves N_i inestimable; each is
// noted, never returned as NaN or Inf. Errors as for JollySeber.
func JollySeberUnadjusted(s Summary) (*JollySeberResult, error) {
	return jollySeber(s, false)
}

// jollySeber holds both forms: adjusted adds 1 to r_i, R_i, m_i and n_i in
// the estimates of M_i and N_i.
func jollySeber(s Summary, adjusted bool) (*JollySeberResult, error) {
	if err := s.Validate(); err != nil {
		return nil, fmt.Errorf("Jolly-Seber: %w", err)
	}
	t := s.Occasions()
	if t < 3 {
		return nil, fmt.Errorf("Jolly-Seber: %w: %d occasions, at least 3 needed", estimators.ErrTooFewOccasions, t)
	}
	recaptured := false
	for _, r := range s.Recaptured {
		recaptured = recaptured || r > 0
	}
	if !recaptured {
		return nil, fmt.Errorf("Jolly-Seber: %w: no released animal was caught again", estimators.ErrNoRecaptures)
	}
	res := &JollySeberResult{
		Method:      "Jolly-Seber (bias-adjusted moment estimates)",
		Occasions:   make([]JollyOccasion, t),
		Variances:   "large-sample variances of Jolly (1965) as given by Seber (1982); N and B conditional on the true values (sampling error only), phi including the binomial survival term, p by the delta method",
		Assumptions: jollyAssumptions(),
		References: []string{
			"Jolly, G. M. (1965). Explicit estimates from capture-recapture data with both death and immigration-stochastic model. Biometrika 52: 225-247.",
			"Seber, G. A. F. (1965). A note on the multiple-recapture census. Biometrika 52: 249-259.",
			"Seber, G. A. F. (1982). The Estimation of Animal Abundance and Related Parameters, 2nd ed. Griffin, London. Ch. 5.",
			"Pollock, K. H., Nichols, J. D., Brownie, C. & Hines, J. E. (1990). Statistical inference for capture-recapture experiments. Wildlife Monographs 107.",
			"Chao, A. (1987). Estimating the population size for capture-recapture data with unequal catchability. Biometrics 43: 783-791.",
		},
	}
	n := func(i int) float64 { return float64(s.Caught[i]) }
	m := func(i int) float64 { return float64(s.Marked[i]) }
	R := func(i int) float64 { return float64(s.Released[i]) }
	r := func(i int) float64 { return float64(s.Recaptured[i]) }
	z := func(i int) float64 { return float64(s.MissedAlive[i]) }

	// Point estimates first; ok flags say which exist.
	M := make([]float64, t)
	N := make([]float64, t)
	hasM := make([]bool, t)
	hasN := make([]bool, t)
	// varMrel[i] is (1/r_i - 1/R_i), or NaN when r_i = 0.
	inv := make([]float64, t)
	for i := 0; i < t; i++ {
		inv[i] = math.NaN()
		if s.Recaptured[i] > 0 {
			inv[i] = 1/r(i) - 1/R(i)
		}
	}
	for i := range res.Occasions {
		o := &res.Occasions[i]
		o.Occasion = i + 1
		o.Caught, o.Marked, o.Released, o.Recaptured, o.MissedAlive = s.Caught[i], s.Marked[i], s.Released[i], s.Recaptured[i], s.MissedAlive[i]
	}
	if !adjusted {
		res.Method = "Jolly-Seber (original moment estimates of Jolly 1965, without the small-sample adjustment)"
	}
	note := func(i int, format string, a ...any) {
		msg := fmt.Sprintf(format, a...)
		res.Occasions[i].Notes = append(res.Occasions[i].Notes, msg)
		res.Warnings = append(res.Warnings, fmt.Sprintf("occasion %d: %s", i+1, msg))
	}
	hasM[0] = true // M_1 = 0: nothing is marked before the first occasion
	for i := 1; i < t-1; i++ {
		if !adjusted {
			if !jollyUnadjustedM(s, i, M, N, hasM, hasN, note) {
				continue
			}
		} else {
			M[i] = m(i) + (R(i)+1)*z(i)/(r(i)+1)
			hasM[i] = true
			switch {
			case s.Released[i] == 0 && s.Caught[i] > 0:
				note(i, "no animal was released here (all %d caught were lost on capture, R = 0): M and N rest on the small-sample adjustment alone and have no standard error", s.Caught[i])
			case s.Recaptured[i] == 0:
				note(i, "no animal released here was caught again (r = 0): M and N rest on the small-sample adjustment alone and have no standard error")
			}
			if M[i] > 0 {
				N[i] = (n(i) + 1) * M[i] / (m(i) + 1)
				hasN[i] = true
			} else {
				note(i, "no marked animal is known to be at risk (m = 0 and z = 0): N and p cannot be estimated")
			}
		}
	}
	for i := 1; i < t-1; i++ {
		if !hasM[i] {
			continue
		}
		o := &res.Occasions[i]
		// M_i.
		v := (M[i] - m(i)) * (M[i] - m(i) + R(i)) * inv[i]
		o.M = value(M[i], v, func(est, se float64) estimators.Interval {
			return estimators.LogNormalIntervalN(est, se, s.Marked[i]+s.MissedAlive[i])
		})
		if !hasN[i] {
			continue
		}
		// N_i.
		vN := math.NaN()
		if s.Marked[i] > 0 {
			a := m(i) / n(i)
			vN = N[i] * (N[i] - n(i)) * ((M[i]-m(i)+R(i))/M[i]*inv[i] + (1-a)/m(i))
		} else {
			note(i, "no marked animal caught (m = 0): the SE of N is not available")
		}
		floor := s.Caught[i]
		if N[i] < n(i) {
			floor = 0
			note(i, "N is below the number caught; the estimate is unreliable")
		}
		o.N = value(N[i], vN, func(est, se float64) estimators.Interval {
			return estimators.LogNormalIntervalN(est, se, floor)
		})
		// p_i.
		p := m(i) / M[i]
		vP := p*p*v/(M[i]*M[i]) + p*(1-p)/M[i]
		o.P = value(p, vP, probInterval)
		if p == 0 {
			note(i, "p is 0 (no marked animal caught)")
		}
	}
	phi := make([]float64, t)
	hasPhi := make([]bool, t)
	for i := 0; i < t-2; i++ {
		if !hasM[i] || !hasM[i+1] {
			missing := i + 1
			if hasM[i] {
				missing = i + 2
			}
			note(i, "M is not estimable on occasion %d: phi cannot be estimated", missing)
			continue
		}
		at := M[i] - m(i) + R(i) // marked animals alive just after release on i
		if at <= 0 {
			note(i, "no marked animal was released (M - m + R = 0): phi cannot be estimated")
			continue
		}
		phi[i] = M[i+1] / at
		hasPhi[i] = true
		j := i + 1
		v := math.NaN()
		if M[j] > 0 && !math.IsNaN(inv[j]) && (i == 0 || !math.IsNaN(inv[i]) || M[i]-m(i) == 0) {
			first := (M[j] - m(j)) * (M[j] - m(j) + R(j)) / (M[j] * M[j]) * inv[j]
			second := 0.0
			if M[i]-m(i) > 0 {
				second = (M[i] - m(i)) / at * inv[i]
			}
			v = phi[i] * phi[i] * (first + second + (1-phi[i])/M[j])
		} else {
			note(i, "a later recapture count is zero: the SE of phi is not available")
		}
		res.Occasions[i].Phi = value(phi[i], v, probInterval)
		if phi[i] > 1 {
			note(i, "phi = %.3f exceeds 1 (the moment estimate is not confined to [0, 1]); read it as survival near 1 with large error", phi[i])
		}
	}
	for i := 1; i < t-2; i++ {
		if !hasN[i] || !hasN[i+1] || !hasPhi[i] {
			continue
		}
		j := i + 1
		b := N[j] - phi[i]*(N[i]-n(i)+R(i))
		v := math.NaN()
		if s.Marked[i] > 0 && s.Marked[j] > 0 && !math.IsNaN(inv[i]) && !math.IsNaN(inv[j]) {
			a, aj := m(i)/n(i), m(j)/n(j)
			at := M[i] - m(i) + R(i)
			v = b*b*(M[j]-m(j))*(M[j]-m(j)+R(j))/(M[j]*M[j])*inv[j] +
				(M[i]-m(i))/at*math.Pow(phi[i]*R(i)*(1-a)/a, 2)*inv[i] +
				(N[i]-n(i))*(N[j]-b)*(1-a)*(1-phi[i])/at +
				N[j]*(N[j]-n(j))*(1-aj)/m(j) +
				phi[i]*phi[i]*N[i]*(N[i]-n(i))*(1-a)/m(i)
		} else {
			note(i, "a recapture count is zero: the SE of B is not available")
		}
		res.Occasions[i].B = value(b, v, estimators.NormalInterval)
		if b < 0 {
			note(i, "B = %.1f is negative (net loss, or sampling error; recruits cannot be negative)", b)
		}
	}
	return res, nil
}

// jollyUnadjustedM sets M_i = m_i + R_i z_i / r_i and N_i = n_i M_i / m_i
// (Jolly 1965) where they exist, with a note where they do not, and
// reports whether M_i exists.
func jollyUnadjustedM(s Summary, i int, M, N []float64, hasM, hasN []bool, note func(int, string, ...any)) bool {
	n, m, R, r, z := float64(s.Caught[i]), float64(s.Marked[i]), float64(s.Released[i]), float64(s.Recaptured[i]), float64(s.MissedAlive[i])
	switch {
	case s.MissedAlive[i] == 0:
		M[i] = m // no marked animal known to have been missed
	case s.Recaptured[i] == 0:
		switch {
		case s.Caught[i] == 0:
			note(i, "nothing was caught here (n = 0): without the small-sample adjustment M, N and p cannot be estimated")
		case s.Released[i] == 0:
			note(i, "no animal was released here (all %d caught were lost on capture, R = 0): without the small-sample adjustment M, N and p cannot be estimated", s.Caught[i])
		default:
			note(i, "no animal released here was caught again (r = 0): without the small-sample adjustment M, N and p cannot be estimated")
		}
		return false
	default:
		M[i] = m + R*z/r
	}
	hasM[i] = true
	switch {
	case s.Marked[i] == 0:
		note(i, "no marked animal caught (m = 0): without the small-sample adjustment N and p cannot be estimated")
	case M[i] > 0:
		N[i] = n * M[i] / m
		hasN[i] = true
	}
	return true
}

// value packs an estimate and its variance. A variance that is NaN, Inf
// or negative (a plug-in value outside the range the formula assumes)
// gives SE 0 and an interval of kind CINone.
func value(est, variance float64, interval func(est, se float64) estimators.Interval) *estimators.Value {
	v := &estimators.Value{Estimate: est}
	if math.IsNaN(variance) || math.IsInf(variance, 0) || variance < 0 {
		v.Interval = estimators.Interval{Low: est, High: est, Level: estimators.DefaultLevel, Kind: estimators.CINone}
		return v
	}
	v.SE = math.Sqrt(variance)
	v.Interval = interval(est, v.SE)
	return v
}

// probInterval is the logit-scale interval for an estimate inside (0, 1)
// and the normal interval otherwise (a moment estimate of survival can
// exceed 1).
func probInterval(est, se float64) estimators.Interval {
	if est > 0 && est < 1 {
		return estimators.LogitInterval(est, se)
	}
	return estimators.NormalInterval(est, se)
}

func jollyAssumptions() []string {
	return []string{
		"Every animal alive at an occasion, marked or not, has the same capture probability on that occasion.",
		"Every marked animal alive after an occasion has the same probability of surviving to the next; survival is apparent: death and permanent emigration are not told apart.",
		"Marks are not lost, overlooked or misread.",
		"Sampling is instantaneous relative to the interval between occasions, and animals are released right after capture.",
		"Animals lost on capture are removed from the released counts R; they do not bias the survival of the others.",
	}
}
