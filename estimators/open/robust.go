package open

import (
	"errors"
	"fmt"
	"math"

	"tagtally/estimators"
	"tagtally/estimators/closed"
)

// RobustPrimary is the two-stage robust-design estimate for one primary
// period.
type RobustPrimary struct {
	// Primary is numbered from 1; Occasions lists its secondary occasions
	// (1-based indices into the histories' columns).
	Primary   int   `json:"primary"`
	Occasions []int `json:"occasions"`
	// Caught is the number of distinct animals caught in the primary.
	Caught int `json:"caught"`
	// Models ranks the closed-population models fitted to the primary
	// (M0 and Mh) by AICc; Chosen is the first of them. Both are empty when
	// no closed model could be fitted (Notes says why).
	Models estimators.Selection `json:"models"`
	Chosen *estimators.Result   `json:"chosen,omitempty"`
	// N is the chosen model's abundance: the animals present in the study
	// area during the primary (with temporary emigration, those not away).
	N *estimators.Value `json:"N,omitempty"`
	// PStar is the probability of being caught at least once in the
	// primary, Caught / N, from the closed model.
	PStar *estimators.Value `json:"p_star,omitempty"`
	// Phi is the survival from this primary to the next (nil for the last
	// primary), from the CJS fit to the collapsed histories, or, for the
	// last interval when the CJS fit only gives a product, the ad hoc ratio
	// described on RobustDesignAdHoc (then Identifiable is still true but
	// a note says so).
	Phi *estimators.Named `json:"phi,omitempty"`
	// B is the number of animals that joined between this primary and the
	// next and were present at the next (nil for the last primary).
	B *estimators.Value `json:"B,omitempty"`
	// TemporaryEmigration is the ad hoc estimate of the probability of
	// being away from the study area during the primary, where both
	// capture probabilities it needs are identifiable (primaries 2..K-1).
	TemporaryEmigration *estimators.Value `json:"temporary_emigration,omitempty"`
	Notes               []string          `json:"notes,omitempty"`
}

// RobustResult is Pollock's robust design fitted by the ad hoc two-stage
// approach.
type RobustResult struct {
	Method    string          `json:"method"`
	Primaries []RobustPrimary `json:"primaries"`
	// Survival is the CJS fit to the primary-period histories (caught at
	// least once in a primary), phi(t) p(t) unless it could not be fitted
	// (then phi(.) p(.), with a warning).
	Survival    *estimators.Result `json:"survival"`
	Assumptions []string           `json:"assumptions"`
	Warnings    []string           `json:"warnings,omitempty"`
	References  []string           `json:"references"`
}

// RobustDesignAdHoc analyses a robust design (Pollock 1982): primary
// periods far enough apart for births, deaths and movement, each made of
// secondary occasions close enough together for the population to be
// closed. primary[j] is the primary period of occasion j (column j of
// h.Caught); it must not decrease, and each primary's occasions must be
// contiguous. Any labels will do (e.g. 0,0,0,1,1,1 or 2024,2024,2025,...).
//
// This is the ad hoc two-stage approach of Pollock (1982), not the joint
// likelihood of Kendall, Pollock & Brownie (1995) or Kendall, Nichols &
// Hines (1997), which RobustDesignML fits (with M0 or Mt within primaries):
//
//  1. Within each primary, the histories of the animals caught in it, on
//     its secondary occasions, are fitted with closed.M0 and closed.Mh
//     (Otis et al. 1978; Pledger 2000) and ranked by AICc
//     (estimators.Select); the first gives N_i. A model that fails (e.g.
//     Mh with fewer than 4 secondaries, or Mh whose likelihood keeps
//     rising with N) is left out with a note; a primary where both fail
//     has no N. A model whose fit sits on a boundary without standard
//     errors (e.g. Mh with one class caught with probability 1) gives way
//     to the best-ranked model that has them, with a note.
//  2. Each animal's history is collapsed to one entry per primary (caught
//     at least once in it), keeping its loss on capture, and the CJS model
//     phi(t) p(t) is fitted to the m-array of the collapsed histories
//     (CJS, FromHistories); phi_i is survival from primary i to i+1.
//
// Derived quantities:
//
//	p*_i = Mt1_i / N_i                    (caught at least once in primary i)
//	phi_{K-1} = (phi_{K-1} p_K)_CJS / p*_K  (last interval, ad hoc)
//	B_i = N_{i+1} - phi_i (N_i - L_i)     (Pollock 1982; L_i lost on capture)
//	gamma_i = 1 - p_i(CJS) / p*_i         (i = 2..K-1)
//
// The last survival is otherwise confounded with the last capture
// probability in CJS; dividing the estimable product by the closed-model
// p*_K is the way the robust design separates them (Pollock 1982). With
// temporary emigration the product is phi_{K-1} (1-gamma_K) p*_K, so this
// ad hoc last survival estimates phi_{K-1} (1-gamma_K): it is biased low
// unless nobody is away during the last primary (noted on the result).
// gamma_i is the ad hoc estimate of random temporary emigration: under random
// temporary emigration the CJS capture probability estimates (1-gamma_i)
// p*_i while the closed model estimates p*_i for the animals present
// (Kendall, Nichols & Hines 1997). It is reported where both are
// identifiable and may fall outside [0, 1] by sampling error (noted).
// SEs combine the two stages as if independent (delta method; the
// covariance between the stages is ignored, as in Pollock 1982), so they
// are approximate.
//
// Errors: ErrInvalidInput for a primary slice of the wrong length or not
// in order, ErrTooFewOccasions for fewer than 3 primaries (CJS needs 3) or
// a primary with a single secondary occasion, and the errors of
// FromHistories and CJS; histories are validated as usual.
func RobustDesignAdHoc(h *estimators.Histories, primary []int) (*RobustResult, error) {
	const name = "robust design (ad hoc two-stage)"
	if err := h.Validate(); err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	t := h.Occasions()
	groups, err := primaryGroups(primary, t)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	k := len(groups)

	res := &RobustResult{
		Method: "Robust design, ad hoc two-stage approach (Pollock 1982): closed models M0/Mh within primaries, CJS survival between them",
		Assumptions: []string{
			"The population is closed within each primary period: no births, deaths or movement between its secondary occasions.",
			"Between primary periods, every animal has the same survival probability; survival is apparent (death and permanent emigration are not told apart).",
			"Temporary emigration, if any, is random: whether an animal is away during a primary does not depend on whether it was away before.",
			"Marks are not lost or misread; animals act independently.",
			"The two stages are treated as independent when their standard errors are combined, so derived SEs are approximate.",
		},
		References: []string{
			"Pollock, K.H. (1982) A capture-recapture design robust to unequal probability of capture. Journal of Wildlife Management 46: 752-757.",
			"Kendall, W.L., Nichols, J.D. & Hines, J.E. (1997) Estimating temporary emigration using capture-recapture data with Pollock's robust design. Ecology 78: 563-578.",
			"Otis, D.L., Burnham, K.P., White, G.C. & Anderson, D.R. (1978) Statistical inference from capture data on closed animal populations. Wildlife Monographs 62.",
			"Pledger, S. (2000) Unified maximum likelihood estimates for closed capture-recapture models using mixtures. Biometrics 56: 434-442.",
		},
		Warnings: []string{"Ad hoc two-stage approach: the closed and open stages are fitted separately, not by the joint robust-design likelihood (Kendall et al. 1997)."},
	}

	lastPrimary := make([]int, h.Animals()) // primary of each animal's last capture
	collapsed := &estimators.Histories{Removed: h.Removed}
	for a, row := range h.Caught {
		c := make([]bool, k)
		for i, g := range groups {
			for _, j := range g {
				if row[j] {
					c[i] = true
					lastPrimary[a] = i
				}
			}
		}
		collapsed.Caught = append(collapsed.Caught, c)
	}
	lost := make([]float64, k)
	for a := range h.Caught {
		if h.Removed != nil && h.Removed[a] {
			lost[lastPrimary[a]]++
		}
	}

	// Stage 1: closed models within each primary.
	for i, g := range groups {
		rp := RobustPrimary{Primary: i + 1}
		for _, j := range g {
			rp.Occasions = append(rp.Occasions, j+1)
		}
		sub := &estimators.Histories{}
		var removed []bool
		for a, row := range h.Caught {
			if !collapsed.Caught[a][i] {
				continue
			}
			r := make([]bool, len(g))
			for s, j := range g {
				r[s] = row[j]
			}
			sub.Caught = append(sub.Caught, r)
			removed = append(removed, h.Removed != nil && h.Removed[a] && lastPrimary[a] == i)
		}
		if h.Removed != nil {
			sub.Removed = removed
		}
		rp.Caught = sub.Animals()
		if rp.Caught == 0 {
			rp.Notes = append(rp.Notes, "no animal was caught in this primary period: no closed-population estimate")
			res.Primaries = append(res.Primaries, rp)
			continue
		}
		var fits []*estimators.Result
		for _, model := range []struct {
			name string
			fit  func(*estimators.Histories) (*estimators.Result, error)
		}{{"M0", closed.M0}, {"Mh", closed.Mh}} {
			r, err := model.fit(sub)
			if err != nil {
				rp.Notes = append(rp.Notes, fmt.Sprintf("%s not fitted: %v", model.name, err))
				continue
			}
			fits = append(fits, r)
		}
		if len(fits) > 0 {
			rp.Models = estimators.Select(fits, 1, rp.Caught)
			rp.Chosen = rp.Models.Rows[0].Result
			for _, row := range rp.Models.Rows {
				if !row.Result.Boundary && row.Result.N != nil && row.Result.N.SE > 0 {
					if row.Result != rp.Chosen {
						rp.Notes = append(rp.Notes, fmt.Sprintf("%s ranks first by AICc but its fit is at a boundary without standard errors; %s is used", rp.Chosen.Method, row.Result.Method))
					}
					rp.Chosen = row.Result
					break
				}
			}
			if rp.Chosen.N != nil {
				n := *rp.Chosen.N
				rp.N = &n
				rp.PStar = pStar(rp.Caught, n)
			}
			if rp.Chosen.Boundary {
				rp.Notes = append(rp.Notes, "the chosen closed model has a boundary estimate: see its warnings")
			}
		}
		res.Primaries = append(res.Primaries, rp)
	}

	// Stage 2: CJS on the collapsed histories.
	m, _, err := FromHistories(collapsed)
	if err != nil {
		return nil, fmt.Errorf("%s: primary-period histories: %w", name, err)
	}
	surv, err := CJS(m, Time, Time)
	if err != nil {
		if errors.Is(err, estimators.ErrNoRecaptures) || errors.Is(err, estimators.ErrNoData) {
			return nil, fmt.Errorf("%s: survival between primary periods: %w", name, err)
		}
		fallback, err2 := CJS(m, Constant, Constant)
		if err2 != nil {
			return nil, fmt.Errorf("%s: survival between primary periods: %w", name, err)
		}
		res.Warnings = append(res.Warnings, fmt.Sprintf("CJS phi(t) p(t) could not be fitted (%v); survival is from phi(.) p(.)", err))
		surv = fallback
	}
	res.Survival = surv
	if surv.Boundary {
		res.Warnings = append(res.Warnings, "the CJS survival fit has a boundary estimate: see its warnings")
	}

	phiTime := surv.Method == "CJS "+ModelName(Time, Time)
	for i := 0; i < k-1; i++ {
		rp := &res.Primaries[i]
		var ph estimators.Named
		var ok bool
		if phiTime {
			ph, ok = surv.Param(fmt.Sprintf("phi[%d]", i+1))
		} else {
			ph, ok = surv.Param("phi")
			ph.Name = fmt.Sprintf("phi[%d]", i+1)
		}
		if !ok || !ph.Identifiable {
			// The last interval under phi(t) p(t): the product over p*_K.
			prod, okp := surv.Param(fmt.Sprintf("phi[%d]*p[%d]", k-1, k))
			last := res.Primaries[k-1].PStar
			if !okp || last == nil || last.Estimate <= 0 {
				rp.Notes = append(rp.Notes, "survival to the next primary is not identifiable: the CJS fit gives only its product with the last capture probability, and the last primary has no closed-model estimate")
				continue
			}
			est := prod.Estimate / last.Estimate
			se := ratioSE(est, prod.Estimate, prod.SE, last.Estimate, last.SE)
			ph = estimators.Named{Name: fmt.Sprintf("phi[%d]", i+1), Identifiable: true}
			ph.Estimate, ph.SE = est, se
			ph.Interval = probabilityInterval(est, se)
			rp.Notes = append(rp.Notes, fmt.Sprintf("survival to primary %d is the CJS product phi*p over the closed-model p* of primary %d (ad hoc); with temporary emigration it estimates survival times the share present in primary %d, so it is biased low", k, k, k))
			if est > 1 {
				rp.Notes = append(rp.Notes, "the ad hoc survival estimate is above 1 (sampling error or a closed-model N that is too low)")
			}
		}
		rp.Phi = &ph

		next := res.Primaries[i+1].N
		if rp.N != nil && next != nil {
			avail := rp.N.Estimate - lost[i]
			b := next.Estimate - ph.Estimate*avail
			v := next.SE*next.SE + ph.Estimate*ph.Estimate*rp.N.SE*rp.N.SE + avail*avail*ph.SE*ph.SE
			bv := estimators.Value{Estimate: b, SE: math.Sqrt(v)}
			bv.Interval = estimators.NormalInterval(b, bv.SE)
			if bv.SE == 0 {
				bv.Interval.Kind = estimators.CINone
			}
			rp.B = &bv
			if b < 0 {
				rp.Notes = append(rp.Notes, "the recruit estimate is negative (sampling error): read it as no detectable recruitment")
			}
		}
	}
	// Ad hoc temporary emigration for primaries 2..K-1.
	for i := 1; i < k-1; i++ {
		rp := &res.Primaries[i]
		var pc estimators.Named
		var ok bool
		if phiTime {
			pc, ok = surv.Param(fmt.Sprintf("p[%d]", i+1))
		} else {
			pc, ok = surv.Param("p")
		}
		if !ok || !pc.Identifiable || rp.PStar == nil || rp.PStar.Estimate <= 0 {
			continue
		}
		ratio := pc.Estimate / rp.PStar.Estimate
		se := ratioSE(ratio, pc.Estimate, pc.SE, rp.PStar.Estimate, rp.PStar.SE)
		g := estimators.Value{Estimate: 1 - ratio, SE: se}
		g.Interval = estimators.NormalInterval(g.Estimate, se)
		if se == 0 {
			g.Interval.Kind = estimators.CINone
		}
		rp.TemporaryEmigration = &g
		if g.Estimate < 0 || g.Estimate > 1 {
			rp.Notes = append(rp.Notes, fmt.Sprintf("the ad hoc temporary emigration estimate %.3f is outside [0, 1] (sampling error); read it as about %.0f", g.Estimate, math.Min(1, math.Max(0, g.Estimate))))
		}
	}
	for _, rp := range res.Primaries {
		for _, n := range rp.Notes {
			res.Warnings = append(res.Warnings, fmt.Sprintf("primary %d: %s", rp.Primary, n))
		}
	}
	return res, nil
}

// pStar is Mt1 / N with the delta-method SE Mt1 SE(N) / N².
func pStar(caught int, n estimators.Value) *estimators.Value {
	if n.Estimate <= 0 {
		return nil
	}
	c := float64(caught)
	v := &estimators.Value{Estimate: c / n.Estimate, SE: c * n.SE / (n.Estimate * n.Estimate)}
	v.Interval = probabilityInterval(v.Estimate, v.SE)
	return v
}

// ratioSE is the delta-method SE of r = a/b for independent a and b.
func ratioSE(r, a, seA, b, seB float64) float64 {
	if a <= 0 || b <= 0 {
		return 0
	}
	v := r * r * (seA*seA/(a*a) + seB*seB/(b*b))
	if math.IsNaN(v) || math.IsInf(v, 0) || v < 0 {
		return 0
	}
	return math.Sqrt(v)
}

// probabilityInterval is the logit-scale interval inside (0, 1), the
// normal interval for an ad hoc ratio outside it, and "not available"
// without an SE.
func probabilityInterval(est, se float64) estimators.Interval {
	switch {
	case se <= 0:
		return estimators.Interval{Low: est, High: est, Level: estimators.DefaultLevel, Kind: estimators.CINone}
	case est > 0 && est < 1:
		return estimators.LogitInterval(est, se)
	default:
		return estimators.NormalInterval(est, se)
	}
}
