package main

import (
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"sort"
	"strings"
	"text/tabwriter"
	"time"

	"tagtally/analysis"
	"tagtally/capture"
	"tagtally/estimators"
	"tagtally/estimators/closed"
)

const estimateDescription = `
Estimates population size from capture histories, either a history CSV file
(columns id and history, a 0/1 string with one character per occasion;
optional sex, age, mass, group, species, removed for losses on capture, and
numeric covariate columns) or a stored study.

Without --model it prints the closed-population model table: the likelihood
models ranked by AICc with Akaike weights and the model-averaged N, Huggins'
conditional likelihood, and the estimators without a likelihood (jackknife,
Chao, Schnabel, Schumacher-Eschmeyer, Chapman) for comparison. A model the
data cannot support is listed with the reason.

Models: ` + "%s" + `

Every estimate rests on assumptions (printed with it); read them before
reporting a figure. Field work that produces these data needs the permits,
animal-welfare approval and handling training that local rules require.`

// estimateInput is what every mode of `tagtally estimate` works from.
type estimateInput struct {
	// Source names where the histories came from, for the report header.
	Source    string
	Set       *capture.HistorySet
	Histories *estimators.Histories
	// Notes are conversion notes (covariates left out and the like).
	Notes []string
	JSON  bool
}

// estimateExtension lets another file add a mode to `tagtally estimate`
// (the open-population models, for one) without editing this one: it
// registers its options on the flag set and, when they are set, handles
// the command instead of the closed-population table.
type estimateExtension struct {
	// flags registers the extension's options.
	flags func(fs *flag.FlagSet)
	// run handles the command when the extension's options are set and
	// reports handled = false otherwise.
	run func(in *estimateInput, stdout io.Writer) (handled bool, err error)
}

// estimateExtensions are added by init functions in estimate_*.go files.
var estimateExtensions []estimateExtension

func runEstimate(args []string, stdout io.Writer) error {
	fs := newFlagSet("estimate", "tagtally estimate (--histories FILE.csv | --study ID --data FILE.db) [options]",
		fmt.Sprintf(estimateDescription, strings.Join(closed.ModelIDs(), ", ")))
	histories := fs.String("histories", "", "capture-history CSV file")
	study := fs.String("study", "", "stored study ID (with --data)")
	data := fs.String("data", "tagtally.db", "data file of the store, for --study")
	model := fs.String("model", "", "run one model only, by its ID (see the list above)")
	asJSON := fs.Bool("json", false, "print one JSON object per model, one per line")
	covariates := fs.String("covariates", "", "comma-separated covariates for the Huggins covariate model (default: every complete covariate)")
	cHat := fs.Float64("c-hat", 1, "overdispersion factor; above 1 the ranking uses QAICc")
	for _, ext := range estimateExtensions {
		ext.flags(fs)
	}
	if err := fs.Parse(args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return fmt.Errorf("%w: unexpected argument %q", errUsage, fs.Arg(0))
	}
	if !(*cHat >= 1) || math.IsInf(*cHat, 0) {
		return fmt.Errorf("%w: --c-hat must be a number of at least 1", errUsage)
	}
	in, err := loadEstimateInput(*histories, *study, *data)
	if err != nil {
		return err
	}
	in.JSON = *asJSON
	for _, ext := range estimateExtensions {
		if handled, err := ext.run(in, stdout); handled || err != nil {
			return err
		}
	}
	opts := closed.TableOptions{CHat: *cHat}
	if *model != "" {
		opts.Models = []string{*model}
	}
	if *covariates != "" {
		for _, c := range strings.Split(*covariates, ",") {
			if c = strings.TrimSpace(c); c != "" {
				opts.Covariates = append(opts.Covariates, c)
			}
		}
	}
	rep, err := closed.Table(in.Histories, opts)
	if err != nil {
		if errors.Is(err, estimators.ErrInvalidInput) && *model != "" {
			return fmt.Errorf("%w: %v", errUsage, err)
		}
		return err
	}
	if in.JSON {
		err = writeEstimateJSON(stdout, rep)
	} else if *model != "" {
		err = writeModelDetail(stdout, in, rep)
	} else {
		err = writeEstimateTable(stdout, in, rep)
	}
	if err != nil {
		return err
	}
	if *model != "" && len(rep.Rows) == 1 && rep.Rows[0].Result == nil {
		return fmt.Errorf("estimate %s: %s", rep.Rows[0].ID, rep.Rows[0].Error)
	}
	return nil
}

// loadEstimateInput reads the histories from a CSV file or the store.
func loadEstimateInput(histories, study, data string) (*estimateInput, error) {
	var set *capture.HistorySet
	var source string
	switch {
	case histories != "" && study != "":
		return nil, fmt.Errorf("%w: give either --histories or --study, not both", errUsage)
	case histories != "":
		f, err := os.Open(histories)
		if err != nil {
			return nil, fmt.Errorf("estimate: %w", err)
		}
		defer f.Close()
		set, err = capture.ReadHistoryCSV(f)
		if err != nil {
			return nil, fmt.Errorf("estimate: %s: %w", histories, err)
		}
		source = histories
	case study != "":
		st, err := capture.Open(data, &capture.Options{ReadOnly: true, Timeout: 5 * time.Second})
		if err != nil {
			return nil, fmt.Errorf("estimate: %w", err)
		}
		defer st.Close()
		set, err = st.Histories(study, nil)
		if err != nil {
			return nil, fmt.Errorf("estimate: study %s: %w", study, err)
		}
		source = fmt.Sprintf("study %s in %s", study, data)
	default:
		return nil, fmt.Errorf("%w: give --histories FILE.csv or --study ID", errUsage)
	}
	h, notes, err := analysis.FromHistorySet(set)
	if err != nil {
		return nil, fmt.Errorf("estimate: %s: %w", source, err)
	}
	for _, n := range set.Notes {
		notes = append(notes, n.Message)
	}
	return &estimateInput{Source: source, Set: set, Histories: h, Notes: notes}, nil
}

// estimateJSON is one line of `tagtally estimate --json`. Numbers that do
// not apply (or are not finite) are left out rather than written as null.
type estimateJSON struct {
	ID          string     `json:"id"`
	Name        string     `json:"name"`
	Family      string     `json:"family"`
	N           *float64   `json:"N,omitempty"`
	SE          *float64   `json:"se,omitempty"`
	CILow       *float64   `json:"ci_low,omitempty"`
	CIHigh      *float64   `json:"ci_high,omitempty"`
	CIKind      string     `json:"ci_kind,omitempty"`
	LogLik      *float64   `json:"loglik,omitempty"`
	Params      *int       `json:"params,omitempty"`
	AICc        *float64   `json:"aicc,omitempty"`
	Delta       *float64   `json:"delta,omitempty"`
	Weight      *float64   `json:"weight,omitempty"`
	Boundary    bool       `json:"boundary,omitempty"`
	Error       string     `json:"error,omitempty"`
	Parameters  []estParam `json:"parameters,omitempty"`
	Warnings    []string   `json:"warnings,omitempty"`
	Assumptions []string   `json:"assumptions,omitempty"`
	References  []string   `json:"references,omitempty"`
}

type estParam struct {
	Name     string   `json:"name"`
	Estimate *float64 `json:"estimate,omitempty"`
	SE       *float64 `json:"se,omitempty"`
	CILow    *float64 `json:"ci_low,omitempty"`
	CIHigh   *float64 `json:"ci_high,omitempty"`
}

func estFinite(v float64) *float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return &v
}

func writeEstimateJSON(w io.Writer, rep *closed.Report) error {
	enc := json.NewEncoder(w)
	for _, row := range rep.Rows {
		o := estimateJSON{ID: row.ID, Name: row.Name, Family: row.Family, Error: row.Error}
		if r := row.Result; r != nil {
			o.N, o.SE = estFinite(r.N.Estimate), estFinite(r.N.SE)
			o.CILow, o.CIHigh, o.CIKind = estFinite(r.N.Low), estFinite(r.N.High), r.N.Kind
			o.Boundary = r.Boundary
			o.Warnings, o.Assumptions, o.References = r.Warnings, r.Assumptions, r.References
			if r.HasLikelihood {
				k := r.Params
				o.LogLik, o.Params = estFinite(r.LogLik), &k
				o.AICc = estFinite(estimators.AICc(r.LogLik, r.Params, r.SampleSize))
			}
			for _, p := range r.Parameters {
				o.Parameters = append(o.Parameters, estParam{Name: p.Name, Estimate: estFinite(p.Estimate), SE: estFinite(p.SE), CILow: estFinite(p.Low), CIHigh: estFinite(p.High)})
			}
		}
		if row.Ranked {
			o.Delta, o.Weight = estFinite(row.Delta), estFinite(row.Weight)
		}
		if err := enc.Encode(o); err != nil {
			return err
		}
	}
	for _, avg := range []struct {
		id, name string
		v        *estimators.Value
		warnings []string
	}{
		{"averaged", "model-averaged N (full-likelihood models)", rep.AveragedN, rep.AveragedWarnings},
		{"averaged-conditional", "model-averaged N (Huggins models)", rep.ConditionalAveragedN, rep.ConditionalAveragedWarnings},
	} {
		if avg.v == nil {
			continue
		}
		o := estimateJSON{ID: avg.id, Name: avg.name, Family: "model average",
			N: estFinite(avg.v.Estimate), SE: estFinite(avg.v.SE), CILow: estFinite(avg.v.Low), CIHigh: estFinite(avg.v.High), CIKind: avg.v.Kind,
			Boundary: len(avg.warnings) > 0, Warnings: avg.warnings,
			References: []string{"Burnham, K.P. & Anderson, D.R. (2002). Model Selection and Multimodel Inference, 2nd ed. Springer."}}
		if err := enc.Encode(o); err != nil {
			return err
		}
	}
	return nil
}

// estShortKinds abbreviates interval kinds for the table; the legend under
// the table gives each in full.
var estShortKinds = map[string]string{
	estimators.CINormal:          "normal",
	estimators.CILogNormal:       "log-normal",
	estimators.CIProfile:         "profile",
	estimators.CILogit:           "logit",
	estimators.CIPoisson:         "Poisson",
	estimators.CIBinomial:        "binomial",
	estimators.CIExact:           "exact",
	estimators.CINone:            "none",
	"normal on 1/N, inverted":    "1/N normal",
	"Student t on 1/N, inverted": "1/N t",
}

func estShortKind(k string) string {
	if s, ok := estShortKinds[k]; ok {
		return s
	}
	return k
}

func estNum(v float64, prec int) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "-"
	}
	return fmt.Sprintf("%.*f", prec, v)
}

func writeEstimateTable(w io.Writer, in *estimateInput, rep *closed.Report) error {
	p := &estWriter{w: w}
	p.printf("Closed-population estimates: %d animals, %d occasions, %d captures (%s)\n", rep.Animals, rep.Occasions, rep.Captures, in.Source)
	kinds := map[string]bool{}
	shown := map[string]bool{}
	var failed []closed.Row
	var flagged []closed.Row
	group := func(title, family string, ranked bool) {
		var rows []closed.Row
		for _, r := range rep.Rows {
			if r.Family != family {
				continue
			}
			if r.Result == nil {
				failed = append(failed, r)
				continue
			}
			rows = append(rows, r)
		}
		if len(rows) == 0 {
			return
		}
		width := len("model")
		for _, r := range rows {
			width = max(width, len(r.Name)+2)
		}
		p.printf("\n%s\n", title)
		tw := tabwriter.NewWriter(p, 2, 8, 2, ' ', tabwriter.AlignRight)
		if ranked {
			fmt.Fprintf(tw, "%-*s\tN\tSE\t95%% CI\tCI kind\tK\t%s\tdelta\tweight\t\n", width, "model", rep.CriterionName)
		} else {
			fmt.Fprintf(tw, "%-*s\tN\tSE\t95%% CI\tCI kind\t\n", width, "model")
		}
		for _, r := range rows {
			res := r.Result
			kinds[res.N.Kind] = true
			shown[r.ID] = true
			name := r.Name
			if res.Boundary || len(res.Warnings) > 0 {
				name += " *"
				flagged = append(flagged, r)
			}
			// Pad on the right so names stay left-aligned in a right-aligned table.
			name = fmt.Sprintf("%-*s", width, name)
			ci := fmt.Sprintf("(%s, %s)", estNum(res.N.Low, 1), estNum(res.N.High, 1))
			if ranked {
				crit, delta, weight := "-", "-", "-"
				if r.Ranked {
					crit, delta, weight = estNum(r.Criterion, 2), estNum(r.Delta, 2), estNum(r.Weight, 3)
				}
				fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%d\t%s\t%s\t%s\t\n", name, estNum(res.N.Estimate, 1), estNum(res.N.SE, 1), ci, estShortKind(res.N.Kind), res.Params, crit, delta, weight)
			} else {
				fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t\n", name, estNum(res.N.Estimate, 1), estNum(res.N.SE, 1), ci, estShortKind(res.N.Kind))
			}
		}
		p.err = errors.Join(p.err, tw.Flush())
	}
	group("Likelihood models (Otis et al. 1978), ranked by "+rep.CriterionName, closed.FamilyFull, true)
	if v := rep.AveragedN; v != nil {
		kinds[v.Kind] = true
		p.printf("Model-averaged N: %s (SE %s), 95%% CI (%s, %s), %s (Burnham & Anderson 2002)\n", estNum(v.Estimate, 1), estNum(v.SE, 1), estNum(v.Low, 1), estNum(v.High, 1), estShortKind(v.Kind))
		for _, w := range rep.AveragedWarnings {
			p.printf("  Warning: %s\n", w)
		}
	}
	group("Conditional likelihood (Huggins 1989), ranked among themselves only", closed.FamilyConditional, true)
	if v := rep.ConditionalAveragedN; v != nil {
		p.printf("Model-averaged N (Huggins models): %s (SE %s), 95%% CI (%s, %s)\n", estNum(v.Estimate, 1), estNum(v.SE, 1), estNum(v.Low, 1), estNum(v.High, 1))
		for _, w := range rep.ConditionalAveragedWarnings {
			p.printf("  Warning: %s\n", w)
		}
	}
	group("Estimators without a likelihood (for comparison, not averaged)", closed.FamilyOther, false)
	if len(flagged) > 0 {
		p.printf("\n* Warnings:\n")
		for _, r := range flagged {
			for _, w := range r.Result.Warnings {
				p.printf("  %s: %s\n", r.Name, w)
			}
		}
	}
	if len(failed) > 0 {
		p.printf("\nNo estimate:\n")
		for _, r := range failed {
			p.printf("  %s: %s\n", r.Name, r.Error)
		}
	}
	if len(shown) > 0 {
		p.printf("\nWhat each model assumes about capture probability:\n")
		for _, m := range closed.Models() {
			if shown[m.ID] {
				p.printf("  %-22s %s\n", m.Name, m.Summary)
			}
		}
	}
	if len(kinds) > 0 {
		p.printf("\nInterval kinds:\n")
		var ks []string
		for k := range kinds {
			ks = append(ks, k)
		}
		sort.Strings(ks)
		for _, k := range ks {
			p.printf("  %-11s %s\n", estShortKind(k), k)
		}
	}
	estWriteNotesAndCautions(p, in)
	return p.err
}

func writeModelDetail(w io.Writer, in *estimateInput, rep *closed.Report) error {
	p := &estWriter{w: w}
	row := rep.Rows[0]
	p.printf("%s: %d animals, %d occasions, %d captures (%s)\n", row.Name, rep.Animals, rep.Occasions, rep.Captures, in.Source)
	if row.Result == nil {
		p.printf("\nNo estimate: %s\n", row.Error)
		estWriteNotesAndCautions(p, in)
		return p.err
	}
	r := row.Result
	p.printf("\nN = %s (SE %s), 95%% CI (%s, %s)\n  interval: %s\n", estNum(r.N.Estimate, 2), estNum(r.N.SE, 2), estNum(r.N.Low, 2), estNum(r.N.High, 2), r.N.Kind)
	if r.HasLikelihood {
		p.printf("log-likelihood %s, K = %d, AICc %s\n", estNum(r.LogLik, 3), r.Params, estNum(estimators.AICc(r.LogLik, r.Params, r.SampleSize), 2))
	}
	if len(r.Parameters) > 0 {
		p.printf("\nParameters:\n")
		tw := tabwriter.NewWriter(p, 2, 8, 2, ' ', tabwriter.AlignRight)
		fmt.Fprintf(tw, "name\testimate\tSE\t95%% CI\t\n")
		for _, q := range r.Parameters {
			ci, se := "-", "-"
			if q.Kind != "" {
				ci = fmt.Sprintf("(%s, %s)", estNum(q.Low, 4), estNum(q.High, 4))
			}
			if q.SE > 0 {
				se = estNum(q.SE, 4)
			}
			fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t\n", q.Name, estNum(q.Estimate, 4), se, ci)
		}
		p.err = errors.Join(p.err, tw.Flush())
	}
	if len(r.Warnings) > 0 {
		p.printf("\nWarnings:\n")
		for _, w := range r.Warnings {
			p.printf("  - %s\n", w)
		}
	}
	p.printf("\nAssumptions:\n")
	for _, a := range r.Assumptions {
		p.printf("  - %s\n", a)
	}
	if len(r.References) > 0 {
		p.printf("\nReferences:\n")
		for _, ref := range r.References {
			p.printf("  %s\n", ref)
		}
	}
	estWriteNotesAndCautions(p, in)
	return p.err
}

func estWriteNotesAndCautions(p *estWriter, in *estimateInput) {
	if len(in.Notes) > 0 {
		p.printf("\nData notes:\n")
		for _, n := range in.Notes {
			p.printf("  - %s\n", n)
		}
	}
	p.printf("\nAssumptions shared by every closed-population estimate:\n")
	for _, a := range closed.Assumptions {
		p.printf("  - %s\n", a)
	}
	p.printf("\nCaution: capturing and handling wild animals needs the permits, animal-welfare\n" +
		"approval and handling training that local rules and licensed practice require;\n" +
		"these figures do not replace that judgement.\n")
}

// estWriter keeps the first write error so printing code stays flat.
type estWriter struct {
	w   io.Writer
	err error
}

func (e *estWriter) Write(b []byte) (int, error) {
	if e.err != nil {
		return 0, e.err
	}
	n, err := e.w.Write(b)
	e.err = err
	return n, err
}

func (e *estWriter) printf(format string, a ...any) {
	if e.err == nil {
		_, e.err = fmt.Fprintf(e.w, format, a...)
	}
}
