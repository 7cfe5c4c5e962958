package export

import (
	"fmt"
	"maps"
	"slices"
	"strings"
	"time"

	"tagtally/analysis"
	"tagtally/capture"
	"tagtally/estimators"
)

// Meta is what the summary sheet says about the export itself.
type Meta struct {
	Version    string
	ExportedAt time.Time
	// OpenChecks is the number of open data-check findings.
	OpenChecks int
	// Devices that contributed records, with their record counts.
	Devices map[string]int
}

// valueRow spreads an estimate over estimate, SE, low, high, interval kind.
func valueRow(v *estimators.Value) []any {
	if v == nil {
		return []any{nil, nil, nil, nil, nil}
	}
	return []any{v.Estimate, v.SE, v.Low, v.High, v.Kind}
}

var valueColumns = []Column{
	{Header: "estimate", Kind: Number},
	{Header: "SE", Kind: Number},
	{Header: "95% CI low", Kind: Number},
	{Header: "95% CI high", Kind: Number},
	{Header: "CI kind", Width: 30},
}

// SummarySheet is the workbook's first page: the study, the counts, the
// headline estimates with their intervals, the data-check count, the
// cautions and the assumptions behind the estimates.
func SummarySheet(st *capture.Study, r *analysis.Report, m Meta) Sheet {
	var rows [][]any
	add := func(item string, value any, note string) { rows = append(rows, []any{item, value, note}) }
	add("Study", st.Name, st.ID)
	add("Design", string(st.Design), designWords(st.Design))
	if st.TargetSpecies != nil {
		add("Target species", strings.Join(st.TargetSpecies, ", "), "")
	}
	if len(st.Occasions) > 0 {
		add("First occasion starts", st.Occasions[0].Start, "UTC")
		add("Last occasion ends", st.Occasions[len(st.Occasions)-1].End, "UTC")
	}
	add("Occasions", len(st.Occasions), "")
	add("Stations", len(st.Stations), "")
	if st.AreaHectares > 0 {
		add("Study area (ha)", st.AreaHectares, "as entered for the study")
	}
	add("Animals caught", r.Animals, "distinct animals (tag chains followed through retags)")
	add("Captures", r.Captures, "captures in hand on the study's occasions")
	add("Recaptures", r.Captures-r.Animals, "captures after an animal's first")
	for _, d := range sortedKeys(m.Devices) {
		add("Device", d, fmt.Sprintf("%d records", m.Devices[d]))
	}
	if r.Closed != nil && r.Closed.AveragedN != nil {
		v := r.Closed.AveragedN
		add("Population size N (model-averaged)", v.Estimate, fmt.Sprintf("SE %.1f; 95%% CI %.1f to %.1f (%s)", v.SE, v.Low, v.High, v.Kind))
	}
	if r.Density != nil {
		v := r.Density.Density
		add("Density (animals per ha)", v.Estimate, fmt.Sprintf("SE %.2f; 95%% CI %.2f to %.2f; effective area %.2f ha (%s)", v.SE, v.Low, v.High, r.Density.EffectiveAreaHa.Estimate, r.Density.Strip))
	}
	if r.CJS != nil && len(r.CJS.Rows) > 0 {
		best := r.CJS.Rows[0].Result
		add("Best survival model", best.Method, fmt.Sprintf("%s %.1f, weight %.2f", r.CJS.CriterionName, r.CJS.Rows[0].Criterion, r.CJS.Rows[0].Weight))
	}
	if r.GOF != nil {
		add("Goodness of fit c-hat", r.GOF.CHat, r.GOF.Recommendation)
	}
	add("Open data-check findings", m.OpenChecks, "estimates from data with open findings should be read with care")
	for _, k := range sortedKeys(r.Errors) {
		add("Not estimated: "+k, r.Errors[k], "")
	}
	if st.Cautions != "" {
		add("Cautions", st.Cautions, "")
	}
	if st.PermitRef != "" {
		add("Permit", st.PermitRef, "")
	}
	add("Handling", "Handle animals only under valid permits and animal-welfare approval, with trained handlers, following local rules and licence conditions.", "")
	for _, a := range assumptions(r) {
		add("Assumption", a, "")
	}
	for _, n := range r.Notes {
		add("Note", n, "")
	}
	add("tagtally version", m.Version, "")
	add("Exported at", m.ExportedAt, "UTC")
	return Sheet{
		Name:    "Summary",
		Columns: []Column{{Header: "item", Width: 36}, {Header: "value", Width: 40}, {Header: "note", Width: 70}},
		Rows:    RowsOf(rows),
	}
}

func designWords(d capture.Design) string {
	switch d {
	case capture.DesignOpen:
		return "open population: births, deaths and movement between occasions"
	case capture.DesignRobust:
		return "robust design: closed secondary occasions within open primary periods"
	}
	return "closed population: no births, deaths or movement during the study"
}

// assumptions collects the assumptions behind every estimate shown,
// each once.
func assumptions(r *analysis.Report) []string {
	var out []string
	seen := map[string]bool{}
	add := func(as []string) {
		for _, a := range as {
			if !seen[a] {
				seen[a] = true
				out = append(out, a)
			}
		}
	}
	if r.Closed != nil {
		for _, row := range r.Closed.Rows {
			if row.Result != nil && row.Ranked && row.Weight > 0.01 {
				add(row.Result.Assumptions)
			}
		}
	}
	if r.JollySeber != nil {
		add(r.JollySeber.Assumptions)
	}
	if r.CJS != nil && len(r.CJS.Rows) > 0 {
		add(r.CJS.Rows[0].Result.Assumptions)
	}
	if r.Robust != nil {
		add(r.Robust.Assumptions)
	}
	if r.Density != nil {
		add(r.Density.Assumptions)
	}
	return out
}

// ClosedSheet is the closed-population model table with a chart of N and
// its interval by model.
func ClosedSheet(r *analysis.Report) (Sheet, bool) {
	if r.Closed == nil {
		return Sheet{}, false
	}
	cols := []Column{{Header: "model", Width: 28}, {Header: "family", Width: 16}}
	cols = append(cols, valueColumns...)
	cols = append(cols,
		Column{Header: "parameters K", Kind: Integer},
		Column{Header: "log-likelihood", Kind: Number},
		Column{Header: r.Closed.CriterionName, Kind: Number},
		Column{Header: "delta", Kind: Number},
		Column{Header: "weight", Kind: Number},
		Column{Header: "note", Width: 50})
	var rows [][]any
	for _, row := range r.Closed.Rows {
		out := []any{row.Name, row.Family}
		if row.Result == nil {
			out = append(out, valueRow(nil)...)
			out = append(out, nil, nil, nil, nil, nil, row.Error)
			rows = append(rows, out)
			continue
		}
		out = append(out, valueRow(row.Result.N)...)
		var k, ll, crit, delta, w any
		if row.Result.HasLikelihood {
			k, ll = row.Result.Params, row.Result.LogLik
		}
		if row.Ranked {
			crit, delta, w = row.Criterion, row.Delta, row.Weight
		}
		out = append(out, k, ll, crit, delta, w, strings.Join(row.Result.Warnings, " "))
		rows = append(rows, out)
	}
	if v := r.Closed.AveragedN; v != nil {
		out := append([]any{"model-averaged N", "full likelihood"}, valueRow(v)...)
		rows = append(rows, append(out, nil, nil, nil, nil, nil, "Burnham & Anderson (2002), unconditional SE"))
	}
	return Sheet{
		Name:    "Closed estimates",
		Columns: cols,
		Rows:    RowsOf(rows),
		Charts:  []Chart{{Title: "Population size N by model, with 95% CI", Kind: "line", Category: 0, Series: []int{2, 4, 5}, YTitle: "animals"}},
	}, true
}

// OpenSheet is the Jolly-Seber table by occasion with the model-averaged
// CJS survival beside it, and a chart of N and survival by occasion.
func OpenSheet(r *analysis.Report) (Sheet, bool) {
	if r.JollySeber == nil {
		return Sheet{}, false
	}
	cols := []Column{{Header: "occasion", Kind: Integer}, {Header: "caught n_i", Kind: Integer}}
	for _, q := range []string{"N", "phi", "B", "p"} {
		cols = append(cols,
			Column{Header: q, Kind: Number}, Column{Header: q + " SE", Kind: Number},
			Column{Header: q + " CI low", Kind: Number}, Column{Header: q + " CI high", Kind: Number})
	}
	cols = append(cols, Column{Header: "note", Width: 50})
	var rows [][]any
	for _, o := range r.JollySeber.Occasions {
		row := []any{o.Occasion, o.Caught}
		for _, v := range []*estimators.Value{o.N, o.Phi, o.B, o.P} {
			row = append(row, valueRow(v)[:4]...)
		}
		rows = append(rows, append(row, strings.Join(o.Notes, " ")))
	}
	return Sheet{
		Name:    "Open estimates",
		Columns: cols,
		Rows:    RowsOf(rows),
		Charts: []Chart{
			{Title: "Population size N by occasion (Jolly-Seber), with 95% CI", Kind: "line", Category: 0, Series: []int{2, 4, 5}, YTitle: "animals"},
			{Title: "Survival phi by interval (Jolly-Seber), with 95% CI", Kind: "line", Category: 0, Series: []int{6, 8, 9}, YTitle: "probability of surviving to the next occasion"},
		},
	}, true
}

// SurvivalModelsSheet is the CJS model table with each model's estimates.
func SurvivalModelsSheet(r *analysis.Report) (Sheet, bool) {
	if r.CJS == nil {
		return Sheet{}, false
	}
	cols := []Column{{Header: "model", Width: 24}, {Header: "parameter", Width: 16}}
	cols = append(cols, valueColumns...)
	cols = append(cols, Column{Header: "identifiable"}, Column{Header: "parameters K", Kind: Integer},
		Column{Header: "log-likelihood", Kind: Number}, Column{Header: r.CJS.CriterionName, Kind: Number},
		Column{Header: "delta", Kind: Number}, Column{Header: "weight", Kind: Number})
	var rows [][]any
	for _, rk := range r.CJS.Rows {
		for _, p := range rk.Result.Parameters {
			row := append([]any{rk.Result.Method, p.Name}, valueRow(&p.Value)...)
			rows = append(rows, append(row, yesNo(p.Identifiable), rk.Result.Params, rk.Result.LogLik, rk.Criterion, rk.Delta, rk.Weight))
		}
	}
	for _, p := range r.CJS.Averaged {
		row := append([]any{"model-averaged", p.Name}, valueRow(&p.Value)...)
		rows = append(rows, append(row, yesNo(p.Identifiable), nil, nil, nil, nil, nil))
	}
	return Sheet{Name: "Survival models", Columns: cols, Rows: RowsOf(rows)}, true
}

// DensitySheet reports the boundary-strip density and what went into it.
func DensitySheet(r *analysis.Report) (Sheet, bool) {
	d := r.Density
	if d == nil {
		return Sheet{}, false
	}
	cols := append([]Column{{Header: "quantity", Width: 34}}, valueColumns...)
	cols = append(cols, Column{Header: "unit", Width: 12})
	rows := [][]any{
		append(append([]any{"population size N"}, valueRow(&d.N)...), "animals"),
		append(append([]any{"mean maximum distance moved"}, valueRow(&d.MMDM)...), "m"),
		append(append([]any{"boundary strip width W (" + d.Strip + ")"}, valueRow(&d.StripWidth)...), "m"),
		append(append([]any{"effective trapping area"}, valueRow(&d.EffectiveAreaHa)...), "ha"),
		append(append([]any{"density"}, valueRow(&d.Density)...), "animals per ha"),
		{"grid area (convex hull of stations)", d.GridAreaHa, nil, nil, nil, nil, "ha"},
		{"animals caught at 2+ stations", d.MovedAnimals, nil, nil, nil, nil, "animals"},
	}
	return Sheet{Name: "Density", Columns: cols, Rows: RowsOf(rows)}, true
}

// DemographySheet lists sex ratio, capture frequencies, age structure by
// occasion and mass by sex and age in one long table.
func DemographySheet(r *analysis.Report) (Sheet, bool) {
	if r.SexRatio == nil && r.Frequencies == nil && r.Ages == nil && r.Mass == nil {
		return Sheet{}, false
	}
	cols := []Column{
		{Header: "measure", Width: 28}, {Header: "group", Width: 20}, {Header: "occasion", Kind: Integer},
		{Header: "n", Kind: Integer}, {Header: "value", Kind: Number}, {Header: "SE or SD", Kind: Number},
		{Header: "95% CI low", Kind: Number}, {Header: "95% CI high", Kind: Number}, {Header: "note", Width: 40},
	}
	var rows [][]any
	if s := r.SexRatio; s != nil {
		rows = append(rows, []any{"proportion male", "sexed animals", nil, s.Males + s.Females, s.ProportionMale.Estimate, s.ProportionMale.SE, s.ProportionMale.Low, s.ProportionMale.High,
			fmt.Sprintf("exact binomial test of 1:1, p = %.3g; %d of unknown sex left out", s.P, s.Unknown)})
	}
	if f := r.Frequencies; f != nil {
		for k, n := range f.F {
			rows = append(rows, []any{"animals caught k times", fmt.Sprintf("k = %d", k+1), nil, n, nil, nil, nil, nil, ""})
		}
	}
	if a := r.Ages; a != nil {
		for i, occ := range a.Occasions {
			for j, cls := range a.Classes {
				p := a.Proportions[i][j]
				rows = append(rows, []any{"proportion by age class", cls, occ, a.Counts[i][j], p.Estimate, p.SE, p.Low, p.High, ""})
			}
		}
	}
	if m := r.Mass; m != nil {
		for _, g := range m.Groups {
			var sd any
			if g.HasSD {
				sd = g.SD
			}
			rows = append(rows, []any{"mean mass (g)", g.Sex + ", " + g.Age, nil, g.N, g.Mean, sd, nil, nil, fmt.Sprintf("range %.1f to %.1f g; SD shown", g.Min, g.Max)})
		}
	}
	return Sheet{Name: "Demography", Columns: cols, Rows: RowsOf(rows)}, true
}

func sortedKeys[V any](m map[string]V) []string {
	return slices.Sorted(maps.Keys(m))
}

// DispersionSheet reports how animals spread over the stations (index of
// dispersion, Morisita's indices) and, where capture positions are known,
// the Clark-Evans nearest-neighbour ratio.
func DispersionSheet(r *analysis.Report) (Sheet, bool) {
	if r.Dispersion == nil && r.NearestNeighbour == nil {
		return Sheet{}, false
	}
	cols := []Column{
		{Header: "index", Width: 34}, {Header: "value", Kind: Number}, {Header: "test", Width: 14},
		{Header: "statistic", Kind: Number}, {Header: "df", Kind: Integer}, {Header: "p", Kind: Number},
		{Header: "reading", Width: 12}, {Header: "note", Width: 50},
	}
	var rows [][]any
	if d := r.Dispersion; d != nil {
		vm, mo := d.VarianceMean, d.Morisita
		rows = append(rows,
			[]any{"variance-to-mean ratio", vm.Ratio, vm.Test.Name, vm.Test.Statistic, vm.Test.DF, vm.Test.P, string(vm.Test.Pattern), fmt.Sprintf("%d animals over %d stations", vm.Total, vm.Stations)},
			[]any{"Morisita's index I_d", mo.Index, mo.Test.Name, mo.Test.Statistic, mo.Test.DF, mo.Test.P, string(mo.Test.Pattern), ""},
			[]any{"standardized Morisita index I_p", mo.Standardized, nil, nil, nil, nil, string(mo.StandardizedPattern), "Smith-Gill (1975): beyond ±0.5 departs from random at the 5% level"},
		)
	}
	if nn := r.NearestNeighbour; nn != nil {
		rows = append(rows, []any{"Clark-Evans ratio R", nn.R, nn.Test.Name, nn.Test.Statistic, nil, nn.Test.P, string(nn.Test.Pattern),
			fmt.Sprintf("%d first-capture positions; mean nearest neighbour %.1f m against %.1f m expected", nn.Points, nn.Observed, nn.Expected)})
	}
	return Sheet{Name: "Dispersion", Columns: cols, Rows: RowsOf(rows)}, true
}
