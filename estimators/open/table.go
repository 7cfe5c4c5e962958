package open

import (
	"errors"
	"fmt"
	"math"

	"tagtally/estimators"
)

// ErrTooFewReleases: a model has so many parameters for the number of
// releases that AICc is undefined (n - K - 1 <= 0), so it cannot be
// ranked. CJSTable lists such models in Failed.
var ErrTooFewReleases = errors.New("too few releases to rank the model by AICc")

// ModelSpec names one CJS model by the structure of phi and p.
type ModelSpec struct {
	Phi Structure `json:"phi"`
	P   Structure `json:"p"`
}

// String is the model's name, e.g. "phi(t) p(.)".
func (s ModelSpec) String() string { return ModelName(s.Phi, s.P) }

// StandardModels is the default candidate set: for one group, phi and p
// each constant or time-dependent (four models); for two or more groups,
// those four plus the group models phi(g) p(.), phi(.) p(g), phi(g) p(g),
// phi(g) p(t), phi(g*t) p(.) and phi(g*t) p(g*t).
func StandardModels(groups int) []ModelSpec {
	out := []ModelSpec{{Constant, Constant}, {Time, Constant}, {Constant, Time}, {Time, Time}}
	if groups > 1 {
		out = append(out,
			ModelSpec{Group, Constant}, ModelSpec{Constant, Group}, ModelSpec{Group, Group},
			ModelSpec{Group, Time}, ModelSpec{GroupTime, Constant}, ModelSpec{GroupTime, GroupTime})
	}
	return out
}

// ModelTable is a ranked set of CJS models with model-averaged survival
// and capture probabilities.
type ModelTable struct {
	estimators.Selection
	// Groups are the group names ("" for a single group) and Occasions T.
	Groups    []string `json:"groups"`
	Occasions int      `json:"occasions"`
	// Averaged holds the model-averaged phi and p by group and occasion,
	// named like the time-dependent parameters: phi[i], p[j], or
	// phi(g)[i], p(g)[j] with groups.
	Averaged []estimators.Named `json:"averaged"`
	// Failed lists the models that could not be fitted, with the reason.
	Failed []string `json:"failed,omitempty"`
	// Warnings about the table as a whole (averaging over
	// non-identifiable parameters, overdispersion).
	Warnings []string `json:"warnings,omitempty"`
}

// CJSTable fits every model in models (StandardModels when nil) to the
// m-arrays (one per group; groups may be nil for a single group), ranks
// them with estimators.Select by AICc, or by QAICc when cHat > 1, and
// model-averages phi and p (Burnham & Anderson 2002, eqs. 4.1 and 4.9):
//
//	theta_bar = Σ w_m theta_m,  SE(theta_bar) = Σ w_m sqrt(var_m + (theta_m - theta_bar)²)
//
// over the models with positive weight, renormalising the weights over the
// models in which that parameter is identifiable (the last phi and p of
// time-dependent models are not; a warning says when some were left out).
// Averaged intervals are logit-scale.
//
// With cHat > 1 (an overdispersion factor from a goodness-of-fit test),
// every model's SEs are multiplied by sqrt(cHat) and its intervals rebuilt
// before averaging (Burnham & Anderson 2002, sec. 2.5; Lebreton et al.
// 1992). A model that cannot be fitted, or has too few releases for its
// parameters to be ranked (ErrTooFewReleases), is listed in Failed; the
// table is an error only when no model is left.
func CJSTable(ms []MArray, groups []string, models []ModelSpec, cHat float64) (*ModelTable, error) {
	if len(ms) == 0 {
		return nil, fmt.Errorf("CJS model table: %w: no m-array", estimators.ErrNoData)
	}
	if groups == nil && len(ms) == 1 {
		groups = []string{""}
	}
	if len(groups) != len(ms) {
		return nil, fmt.Errorf("CJS model table: %w: %d group names for %d m-arrays", estimators.ErrInvalidInput, len(groups), len(ms))
	}
	if math.IsNaN(cHat) || math.IsInf(cHat, 0) || cHat < 0 {
		return nil, fmt.Errorf("CJS model table: %w: overdispersion factor %v", estimators.ErrInvalidInput, cHat)
	}
	if models == nil {
		models = StandardModels(len(ms))
	}
	tab := &ModelTable{Groups: groups, Occasions: ms[0].Occasions()}
	var results []*estimators.Result
	var firstErr error
	for _, spec := range models {
		var r *estimators.Result
		var err error
		if len(ms) == 1 {
			r, err = CJS(ms[0], spec.Phi, spec.P)
		} else {
			r, err = CJSGroups(ms, groups, spec.Phi, spec.P)
		}
		if err != nil {
			if firstErr == nil {
				firstErr = err
			}
			tab.Failed = append(tab.Failed, err.Error())
			continue
		}
		if math.IsInf(estimators.QAICc(r.LogLik, r.Params, r.SampleSize, cHat), 0) {
			err := fmt.Errorf("CJS %s: %w: %d releases for %d parameters", spec, ErrTooFewReleases, r.SampleSize, r.Params)
			if firstErr == nil {
				firstErr = err
			}
			tab.Failed = append(tab.Failed, err.Error())
			continue
		}
		if cHat > 1 {
			inflate(r, cHat)
		}
		results = append(results, r)
	}
	if len(results) == 0 {
		return nil, fmt.Errorf("CJS model table: no model could be fitted: %w", firstErr)
	}
	tab.Selection = estimators.Select(results, cHat, 0)
	if cHat > 1 {
		tab.Warnings = append(tab.Warnings, fmt.Sprintf("overdispersion factor c-hat = %.3f applied: models ranked by QAICc, standard errors multiplied by %.3f", cHat, math.Sqrt(cHat)))
	}
	tab.average()
	return tab, nil
}

// inflate multiplies a model's SEs by sqrt(cHat) and rebuilds the
// intervals.
func inflate(r *estimators.Result, cHat float64) {
	f := math.Sqrt(cHat)
	for k := range r.Parameters {
		p := &r.Parameters[k]
		if !p.Identifiable || p.SE == 0 {
			continue
		}
		p.SE *= f
		p.Interval = estimators.LogitInterval(p.Estimate, p.SE)
	}
	r.Warnings = append(r.Warnings, fmt.Sprintf("standard errors multiplied by sqrt(c-hat) = %.3f for overdispersion", f))
}

// lookup finds the value a model gives to phi or p for group g on
// occasion occ, whatever the model's structure.
func lookup(r *estimators.Result, base, g string, occ int) (estimators.Named, bool) {
	var names []string
	if g != "" {
		names = append(names, fmt.Sprintf("%s(%s)[%d]", base, g, occ), fmt.Sprintf("%s(%s)", base, g))
	}
	names = append(names, fmt.Sprintf("%s[%d]", base, occ), base)
	for _, n := range names {
		if p, ok := r.Param(n); ok {
			return p, true
		}
	}
	return estimators.Named{}, false
}

func (tab *ModelTable) average() {
	t := tab.Occasions
	left := map[string]bool{}
	var edge []string
	one := func(base, g string, occ int) {
		name := fmt.Sprintf("%s[%d]", base, occ)
		if g != "" {
			name = fmt.Sprintf("%s(%s)[%d]", base, g, occ)
		}
		type term struct{ w, est, se float64 }
		var terms []term
		wsum := 0.0
		for _, row := range tab.Rows {
			if row.Weight <= 0 {
				continue
			}
			p, ok := lookup(row.Result, base, g, occ)
			if !ok {
				continue
			}
			if !p.Identifiable {
				left[name] = true
				continue
			}
			terms = append(terms, term{row.Weight, p.Estimate, p.SE})
			wsum += row.Weight
		}
		out := estimators.Named{Name: name}
		out.Interval = estimators.Interval{Level: estimators.DefaultLevel, Kind: estimators.CINone}
		if wsum <= 0 {
			tab.Averaged = append(tab.Averaged, out)
			return
		}
		mean := 0.0
		for _, x := range terms {
			mean += x.w / wsum * x.est
		}
		se := 0.0
		for _, x := range terms {
			d := x.est - mean
			se += x.w / wsum * math.Sqrt(x.se*x.se+d*d)
		}
		if se < 1e-8 || mean < 1e-6 || mean > 1-1e-6 {
			// The models put this parameter at (or next to) 0 or 1: a
			// Wald-type interval means nothing there.
			se = 0
			edge = append(edge, name)
		}
		out.Identifiable = true
		out.Estimate, out.SE = mean, se
		out.Interval = estimators.LogitInterval(mean, se)
		if se == 0 {
			out.Interval.Kind = estimators.CINone
		}
		tab.Averaged = append(tab.Averaged, out)
	}
	for _, g := range tab.Groups {
		for i := 1; i < t; i++ {
			one("phi", g, i)
		}
		for j := 2; j <= t; j++ {
			one("p", g, j)
		}
	}
	if len(edge) > 0 {
		tab.Warnings = append(tab.Warnings, fmt.Sprintf("averages of %v are at the boundary (0 or 1): no standard error or interval is given", edge))
	}
	if len(left) > 0 {
		var names []string
		for _, n := range tab.Averaged {
			if left[n.Name] {
				names = append(names, n.Name)
			}
		}
		tab.Warnings = append(tab.Warnings, fmt.Sprintf("averages of %v leave out the models in which they are not identifiable (weights renormalised over the others); an average with no identifiable model has Identifiable false", names))
	}
}
