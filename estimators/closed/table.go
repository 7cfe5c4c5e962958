package closed

import (
	"fmt"
	"math"
	"sort"
	"strings"

	"tagtally/estimators"
)

// Model families in the table.
const (
	// FamilyFull: the full-likelihood models of Otis et al. (1978), ranked
	// together by AICc.
	FamilyFull = "full likelihood"
	// FamilyConditional: Huggins' conditional likelihood, ranked only
	// among its own fits (its log-likelihood is not comparable with the
	// full-likelihood models).
	FamilyConditional = "conditional likelihood"
	// FamilyOther: estimators without a likelihood (jackknife, Chao,
	// multiple census, two-sample), shown for comparison and never
	// averaged.
	FamilyOther = "no likelihood"
)

// ModelInfo describes one entry of the model table.
type ModelInfo struct {
	// ID is the short name used to pick the model (e.g. "mth", "chao-mh").
	ID string `json:"id"`
	// Name is the published name.
	Name   string `json:"name"`
	Family string `json:"family"`
	// Summary says in plain words what varies in the model.
	Summary string `json:"summary"`
	run     func(h *estimators.Histories, opts TableOptions) (*estimators.Result, error)
}

// tableModels is the index of the model table, in display order.
var tableModels = []ModelInfo{
	{ID: "m0", Name: "M0", Family: FamilyFull, Summary: "one capture probability for every animal and occasion",
		run: func(h *estimators.Histories, _ TableOptions) (*estimators.Result, error) { return M0(h) }},
	{ID: "mt", Name: "Mt", Family: FamilyFull, Summary: "capture probability varies by occasion",
		run: func(h *estimators.Histories, _ TableOptions) (*estimators.Result, error) { return Mt(h) }},
	{ID: "mb", Name: "Mb", Family: FamilyFull, Summary: "trap response: recapture probability differs from first capture",
		run: func(h *estimators.Histories, _ TableOptions) (*estimators.Result, error) { return Mb(h) }},
	{ID: "mh", Name: "Mh", Family: FamilyFull, Summary: "capture probability varies among animals (two-point mixture)",
		run: func(h *estimators.Histories, _ TableOptions) (*estimators.Result, error) { return Mh(h) }},
	{ID: "mth", Name: "Mth", Family: FamilyFull, Summary: "varies among animals and by occasion",
		run: func(h *estimators.Histories, _ TableOptions) (*estimators.Result, error) { return Mth(h) }},
	{ID: "mtb", Name: "Mtb", Family: FamilyFull, Summary: "varies by occasion, with a trap response",
		run: func(h *estimators.Histories, _ TableOptions) (*estimators.Result, error) { return Mtb(h) }},
	{ID: "huggins", Name: "Huggins p(.)", Family: FamilyConditional, Summary: "conditional likelihood, constant capture probability",
		run: func(h *estimators.Histories, _ TableOptions) (*estimators.Result, error) {
			return Huggins(h, nil, false)
		}},
	{ID: "huggins-covariates", Name: "Huggins p(covariates)", Family: FamilyConditional, Summary: "conditional likelihood, capture probability depends on individual covariates",
		run: func(h *estimators.Histories, opts TableOptions) (*estimators.Result, error) {
			covs := tableCovariates(h, opts)
			if len(covs) == 0 {
				return nil, errNotApplicable("the data have no individual covariates")
			}
			return Huggins(h, covs, false)
		}},
	{ID: "jackknife", Name: "Jackknife (Burnham-Overton)", Family: FamilyOther, Summary: "heterogeneity among animals, no likelihood",
		run: func(h *estimators.Histories, _ TableOptions) (*estimators.Result, error) {
			f, err := FrequenciesFromHistories(h)
			if err != nil {
				return nil, err
			}
			r, err := Jackknife(f)
			if err != nil {
				return nil, err
			}
			return r.Result, nil
		}},
	{ID: "chao-mh", Name: "Chao Mh", Family: FamilyOther, Summary: "lower bound under heterogeneity among animals",
		run: func(h *estimators.Histories, _ TableOptions) (*estimators.Result, error) {
			f, err := FrequenciesFromHistories(h)
			if err != nil {
				return nil, err
			}
			return ChaoMh(f)
		}},
	{ID: "chao-mt", Name: "Chao Mt", Family: FamilyOther, Summary: "occasion effects, for sparse data",
		run: func(h *estimators.Histories, _ TableOptions) (*estimators.Result, error) {
			f, err := FrequenciesFromHistories(h)
			if err != nil {
				return nil, err
			}
			return ChaoMt(f)
		}},
	{ID: "chao-mth", Name: "Chao Mth (sample coverage)", Family: FamilyOther, Summary: "heterogeneity among animals and occasion effects",
		run: func(h *estimators.Histories, _ TableOptions) (*estimators.Result, error) { return ChaoMth(h) }},
	{ID: "schnabel", Name: "Schnabel (Chapman +1)", Family: FamilyOther, Summary: "multiple census, occasion effects",
		run: func(h *estimators.Histories, _ TableOptions) (*estimators.Result, error) {
			c, err := CensusFromHistories(h)
			if err != nil {
				return nil, err
			}
			return Schnabel(c, true)
		}},
	{ID: "schumacher-eschmeyer", Name: "Schumacher-Eschmeyer", Family: FamilyOther, Summary: "multiple census by regression",
		run: func(h *estimators.Histories, _ TableOptions) (*estimators.Result, error) {
			c, err := CensusFromHistories(h)
			if err != nil {
				return nil, err
			}
			return SchumacherEschmeyer(c)
		}},
	{ID: "chapman", Name: "Chapman", Family: FamilyOther, Summary: "two samples only",
		run: func(h *estimators.Histories, _ TableOptions) (*estimators.Result, error) {
			if h.Occasions() != 2 {
				return nil, errNotApplicable("needs exactly 2 occasions")
			}
			s, err := TwoSampleFromHistories(h)
			if err != nil {
				return nil, err
			}
			return Chapman(s, TwoSampleCIAuto)
		}},
}

// errNotApplicable marks a model that does not apply to these data; such
// models are left out of the full table but reported when asked for by
// name.
type errNotApplicable string

func (e errNotApplicable) Error() string { return "not applicable: " + string(e) }

// Models lists the entries of the model table in display order.
func Models() []ModelInfo {
	out := make([]ModelInfo, len(tableModels))
	copy(out, tableModels)
	return out
}

// tableCovariates returns the covariates Huggins uses: opts.Covariates, or
// every covariate of h in name order.
func tableCovariates(h *estimators.Histories, opts TableOptions) []string {
	if opts.Covariates != nil {
		return opts.Covariates
	}
	var names []string
	for name := range h.Covariates {
		names = append(names, name)
	}
	sort.Strings(names)
	return names
}

// TableOptions chooses what Table runs.
type TableOptions struct {
	// Models are the IDs (see Models) to run; empty runs every model that
	// applies to the data.
	Models []string
	// Covariates are the individual covariates for the Huggins covariate
	// model; nil means all of h.Covariates.
	Covariates []string
	// CHat is an overdispersion factor; above 1 the ranking uses QAICc.
	CHat float64
}

// Row is one model of the table: its result, or why it failed.
type Row struct {
	ID     string             `json:"id"`
	Name   string             `json:"name"`
	Family string             `json:"family"`
	Result *estimators.Result `json:"result,omitempty"`
	// Error says why the model gave no estimate (e.g. "N is not
	// identifiable: no recaptures"); empty when it did.
	Error string `json:"error,omitempty"`
	// Ranked is true when the row took part in an AICc ranking; Criterion,
	// Delta and Weight are meaningful only then.
	Ranked    bool    `json:"ranked"`
	Criterion float64 `json:"criterion,omitempty"`
	Delta     float64 `json:"delta,omitempty"`
	Weight    float64 `json:"weight,omitempty"`
}

// Report is the model table for one set of capture histories.
type Report struct {
	Animals   int `json:"animals"`
	Occasions int `json:"occasions"`
	Captures  int `json:"captures"`
	// CriterionName is "AICc", or "QAICc" when CHat > 1.
	CriterionName string `json:"criterion_name"`
	// Rows: full-likelihood models best first, then conditional-likelihood
	// models best first, then the other estimators in index order; failed
	// models keep their place in their group, after the ranked ones.
	Rows []Row `json:"rows"`
	// AveragedN is the model-averaged N over the full-likelihood models
	// (Burnham & Anderson 2002); nil when none gave an estimate.
	AveragedN *estimators.Value `json:"averaged_N,omitempty"`
	// ConditionalAveragedN is the same over the Huggins fits.
	ConditionalAveragedN *estimators.Value `json:"conditional_averaged_N,omitempty"`
	// AveragedWarnings and ConditionalAveragedWarnings flag an average
	// that leans on boundary estimates (see averageWarnings); empty when
	// there is nothing to say.
	AveragedWarnings            []string `json:"averaged_warnings,omitempty"`
	ConditionalAveragedWarnings []string `json:"conditional_averaged_warnings,omitempty"`
}

// averageWarnings says when a model-averaged N leans on boundary estimates:
// a model at N = Mt1 has an SE that says nothing about precision (often 0),
// so the unconditional SE and interval built from it (Burnham & Anderson
// 2002) understate the uncertainty. Models with under 1% of the weight are
// ignored (common practice: they hardly move the average).
func averageWarnings(rows []Row) []string {
	var names []string
	for _, r := range rows {
		if r.Ranked && r.Weight >= 0.01 && r.Result != nil && r.Result.Boundary {
			names = append(names, r.Name)
		}
	}
	if len(names) == 0 {
		return nil
	}
	return []string{fmt.Sprintf("the average leans on boundary estimates (%s): their standard errors say little about precision, so the averaged SE and interval understate the uncertainty; read those models' own intervals and warnings", strings.Join(names, ", "))}
}

// Table runs the closed-population models on h and assembles the model
// table: the likelihood models of Otis et al. (1978) ranked by AICc with
// Akaike weights and the model-averaged N (estimators.Select; Burnham &
// Anderson 2002), Huggins' conditional likelihood ranked among its own
// fits, and the estimators without a likelihood (jackknife, Chao,
// multiple census, two-sample) for comparison.
//
// A model that fails (no recaptures, too few occasions, no convergence)
// keeps a row with its error; Table itself fails only when h is unusable
// (no animals, ragged rows) or opts names an unknown model.
func Table(h *estimators.Histories, opts TableOptions) (*Report, error) {
	if err := h.Validate(); err != nil {
		return nil, fmt.Errorf("model table: %w", err)
	}
	want := map[string]bool{}
	for _, id := range opts.Models {
		id = strings.ToLower(strings.TrimSpace(id))
		if _, ok := lookupModel(id); !ok {
			return nil, fmt.Errorf("model table: %w: unknown model %q (known: %s)", estimators.ErrInvalidInput, id, strings.Join(ModelIDs(), ", "))
		}
		want[id] = true
	}
	rep := &Report{Animals: h.Animals(), Occasions: h.Occasions(), CriterionName: "AICc"}
	if opts.CHat > 1 {
		rep.CriterionName = "QAICc"
	}
	for _, row := range h.Caught {
		for _, c := range row {
			if c {
				rep.Captures++
			}
		}
	}
	var full, cond, other []Row
	for _, m := range tableModels {
		if len(want) > 0 && !want[m.ID] {
			continue
		}
		row := Row{ID: m.ID, Name: m.Name, Family: m.Family}
		res, err := runModel(m, h, opts)
		if err != nil {
			if _, na := err.(errNotApplicable); na && len(want) == 0 {
				continue
			}
			row.Error = err.Error()
		} else {
			row.Result = res
			if res.Method != "" {
				row.Name = res.Method
			}
		}
		switch m.Family {
		case FamilyFull:
			full = append(full, row)
		case FamilyConditional:
			cond = append(cond, row)
		default:
			other = append(other, row)
		}
	}
	var avg, condAvg *estimators.Value
	full, avg = rankRows(full, opts.CHat, rep.Animals)
	cond, condAvg = rankRows(cond, opts.CHat, rep.Animals)
	rep.Rows = append(append(append(rep.Rows, full...), cond...), other...)
	rep.AveragedN = avg
	rep.ConditionalAveragedN = condAvg
	if avg != nil {
		rep.AveragedWarnings = averageWarnings(full)
	}
	if condAvg != nil {
		rep.ConditionalAveragedWarnings = averageWarnings(cond)
	}
	return rep, nil
}

// runModel runs one model, turning a panic in it into an error so one
// model cannot take the table down.
func runModel(m ModelInfo, h *estimators.Histories, opts TableOptions) (res *estimators.Result, err error) {
	defer func() {
		if p := recover(); p != nil {
			res, err = nil, fmt.Errorf("%s: internal error: %v", m.Name, p)
		}
	}()
	res, err = m.run(h, opts)
	if err == nil && (res == nil || res.N == nil) {
		return nil, fmt.Errorf("%s: no estimate of N", m.Name)
	}
	return res, err
}

// rankRows ranks the successful rows of one family with estimators.Select
// and puts failures after them.
func rankRows(rows []Row, cHat float64, caught int) ([]Row, *estimators.Value) {
	var results []*estimators.Result
	byResult := map[*estimators.Result]Row{}
	var failed []Row
	for _, r := range rows {
		if r.Result == nil || !r.Result.HasLikelihood {
			failed = append(failed, r)
			continue
		}
		results = append(results, r.Result)
		byResult[r.Result] = r
	}
	if len(results) == 0 {
		return rows, nil
	}
	sel := estimators.Select(results, cHat, caught)
	out := make([]Row, 0, len(rows))
	for _, rk := range sel.Rows {
		r := byResult[rk.Result]
		if !math.IsInf(rk.Criterion, 0) && !math.IsNaN(rk.Criterion) {
			r.Ranked = true
			r.Criterion, r.Delta, r.Weight = rk.Criterion, rk.Delta, rk.Weight
		}
		out = append(out, r)
	}
	return append(out, failed...), sel.AveragedN
}

func lookupModel(id string) (ModelInfo, bool) {
	for _, m := range tableModels {
		if m.ID == id {
			return m, true
		}
	}
	return ModelInfo{}, false
}

// ModelIDs lists the IDs accepted in TableOptions.Models.
func ModelIDs() []string {
	ids := make([]string, len(tableModels))
	for i, m := range tableModels {
		ids[i] = m.ID
	}
	return ids
}

// Assumptions common to every closed-population estimate, for reports.
var Assumptions = []string{
	"the population is closed: no births, deaths, immigration or emigration between the first and last occasion (apart from recorded losses on capture)",
	"marks are permanent and read correctly; each animal keeps one capture history (retags linked)",
	"each model adds its own assumption about how capture probability varies; read the assumptions of the model you report",
}
