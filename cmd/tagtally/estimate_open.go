package main

import (
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"strconv"
	"strings"
	"text/tabwriter"

	"tagtally/estimators"
	"tagtally/estimators/open"
)

// openReport is the --open --json output of `tagtally estimate`.
type openReport struct {
	Source      string                 `json:"source,omitempty"`
	Notes       []string               `json:"data_notes,omitempty"`
	Animals     int                    `json:"animals"`
	Occasions   int                    `json:"occasions"`
	LostOnCatch int                    `json:"lost_on_capture"`
	JollySeber  *open.JollySeberResult `json:"jolly_seber"`
	// GOF is TEST 2 + TEST 3 of the CJS model phi(t) p(t) (by group when
	// the CJS table has groups); nil when the tests could not be run
	// (GOFError says why).
	GOF      *open.GOF `json:"goodness_of_fit"`
	GOFError string    `json:"goodness_of_fit_error,omitempty"`
	// CHat is the overdispersion factor the CJS table used, and
	// CHatSource where it came from: "--c-hat" or "goodness of fit".
	CHat       float64       `json:"c_hat"`
	CHatSource string        `json:"c_hat_source"`
	CJS        openCJSReport `json:"cjs"`
	Cautions   []string      `json:"cautions"`
}

type openCJSReport struct {
	Criterion string             `json:"criterion"`
	Groups    []string           `json:"groups,omitempty"`
	Models    []openCJSModel     `json:"models"`
	Averaged  []estimators.Named `json:"averaged"`
	Failed    []string           `json:"failed,omitempty"`
	Warnings  []string           `json:"warnings,omitempty"`
}

type openCJSModel struct {
	Name   string  `json:"name"`
	LogLik float64 `json:"loglik"`
	Params int     `json:"params"`
	AICc   float64 `json:"aicc"`
	// QAICc is set when the table is ranked by QAICc (c-hat > 1); delta
	// and weight are then on QAICc.
	QAICc    *float64           `json:"qaicc,omitempty"`
	Delta    float64            `json:"delta"`
	Weight   float64            `json:"weight"`
	Phi      []estimators.Named `json:"phi"`
	P        []estimators.Named `json:"p"`
	Products []estimators.Named `json:"products,omitempty"`
	Boundary bool               `json:"boundary,omitempty"`
	Warnings []string           `json:"warnings,omitempty"`
}

// openCautions is printed with every open-population report.
var openCautions = []string{
	"Capturing, marking and handling wild animals needs the permits, animal-welfare approval and handling training required where the work is done; follow local rules and licensed practice.",
	"Survival here is apparent survival: death and permanent emigration cannot be told apart.",
	"Abundance and recruits assume marked and unmarked animals are equally catchable; capture heterogeneity biases N low.",
}

// The --open option of `tagtally estimate`, added through the command's
// extension hook so that the closed-population code stays untouched.
func init() {
	var openFlag *bool
	var fs *flag.FlagSet
	estimateExtensions = append(estimateExtensions, estimateExtension{
		flags: func(f *flag.FlagSet) {
			fs = f
			openFlag = f.Bool("open", false, "open-population estimates instead: the Jolly-Seber table by occasion, the goodness-of-fit tests of the Cormack-Jolly-Seber model and its model table (group models when every animal has a group), ranked by QAICc when the tests find c-hat above 1 unless --c-hat is given; with --json one JSON object")
		},
		run: func(in *estimateInput, stdout io.Writer) (bool, error) {
			if openFlag == nil || !*openFlag {
				return false, nil
			}
			// An explicit --c-hat wins; otherwise (cHat = 0) the
			// goodness-of-fit test supplies it.
			cHat := 0.0
			fs.Visit(func(f *flag.Flag) {
				if f.Name == "c-hat" {
					cHat = -1
				}
			})
			if cHat < 0 {
				v, err := strconv.ParseFloat(fs.Lookup("c-hat").Value.String(), 64)
				if err != nil {
					return true, fmt.Errorf("%w: --c-hat: %v", errUsage, err)
				}
				cHat = v
			}
			return true, estimateOpen(in, cHat, stdout)
		},
	})
}

// estimateOpen runs the open-population part of `tagtally estimate`:
// the Jolly-Seber table by occasion for all animals together, the
// goodness-of-fit tests of the CJS model phi(t) p(t) (TEST 2 + TEST 3,
// summed over groups when the table has groups), and the CJS model table
// (group models too when every animal has a group label and there are at
// least two groups), ranked by QAICc when c-hat > 1. cHat is the value
// given with --c-hat, or 0 to take c-hat from the goodness-of-fit test
// (its c-hat when above 1, else 1: the rule of GOF.SelectionCHat, which
// the study report of the server follows too). It writes text, or one
// JSON object when in.JSON.
func estimateOpen(in *estimateInput, cHat float64, stdout io.Writer) error {
	h := in.Histories
	_, summary, err := open.FromHistories(h)
	if err != nil {
		return err
	}
	js, err := open.JollySeber(summary)
	if err != nil {
		return err
	}
	var ms []open.MArray
	var groups []string
	if h.Groups != nil {
		groups, ms, err = open.GroupMArrays(h)
		if err != nil {
			return err
		}
	}
	if len(ms) < 2 {
		m, _, err := open.FromHistories(h)
		if err != nil {
			return err
		}
		ms, groups = []open.MArray{m}, nil
	}
	var gof *open.GOF
	var gofErr error
	if len(ms) > 1 {
		gof, _, gofErr = open.GoodnessOfFitByGroup(h)
	} else {
		gof, gofErr = open.GoodnessOfFit(h)
	}
	source := "--c-hat"
	if cHat == 0 {
		cHat, source = 1, "goodness of fit"
		if gofErr == nil {
			cHat = gof.SelectionCHat()
		} else {
			source = "none (the goodness-of-fit tests could not be run)"
		}
	}
	tab, err := open.CJSTable(ms, groups, nil, cHat)
	if err != nil {
		return err
	}
	rep := openReport{
		GOF:        gof,
		CHat:       cHat,
		CHatSource: source,
		Source:     in.Source,
		Notes:      in.Notes,
		Animals:    h.Animals(),
		Occasions:  h.Occasions(),
		JollySeber: js,
		CJS: openCJSReport{
			Criterion: tab.CriterionName,
			Groups:    groups,
			Averaged:  tab.Averaged,
			Failed:    tab.Failed,
			Warnings:  tab.Warnings,
		},
		Cautions: openCautions,
	}
	if gofErr != nil {
		rep.GOFError = gofErr.Error()
	}
	for i := range summary.Caught {
		rep.LostOnCatch += summary.Lost(i)
	}
	for _, row := range tab.Rows {
		r := row.Result
		mod := openCJSModel{
			Name:     strings.TrimPrefix(r.Method, "CJS "),
			LogLik:   r.LogLik,
			Params:   r.Params,
			AICc:     r.AICc,
			Delta:    row.Delta,
			Weight:   row.Weight,
			Boundary: r.Boundary,
			Warnings: r.Warnings,
		}
		if tab.CriterionName != "AICc" {
			q := row.Criterion
			mod.QAICc = &q
		}
		for _, p := range r.Parameters {
			switch {
			case strings.Contains(p.Name, "*"):
				mod.Products = append(mod.Products, p)
			case strings.HasPrefix(p.Name, "phi"):
				mod.Phi = append(mod.Phi, p)
			default:
				mod.P = append(mod.P, p)
			}
		}
		rep.CJS.Models = append(rep.CJS.Models, mod)
	}
	if in.JSON {
		enc := json.NewEncoder(stdout)
		enc.SetIndent("", "  ")
		return enc.Encode(rep)
	}
	return writeOpenText(stdout, &rep)
}

func writeOpenText(w io.Writer, rep *openReport) error {
	fmt.Fprintf(w, "Open-population estimates: %d animals, %d occasions, %d lost on capture", rep.Animals, rep.Occasions, rep.LostOnCatch)
	if rep.Source != "" {
		fmt.Fprintf(w, " (%s)", rep.Source)
	}
	fmt.Fprint(w, "\n\n")

	js := rep.JollySeber
	fmt.Fprintf(w, "%s\n", js.Method)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "occasion\tn\tm\tR\tr\tz\tN\tSE\t95% CI\tphi\tSE\t95% CI\tB\tSE\tp\tSE\t")
	for _, o := range js.Occasions {
		fmt.Fprintf(tw, "%d\t%d\t%d\t%d\t%d\t%d\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t\n",
			o.Occasion, o.Caught, o.Marked, o.Released, o.Recaptured, o.MissedAlive,
			num(o.N, "%.1f"), se(o.N, "%.1f"), ci(o.N, "%.0f"),
			num(o.Phi, "%.3f"), se(o.Phi, "%.3f"), ci(o.Phi, "%.3f"),
			num(o.B, "%.1f"), se(o.B, "%.1f"),
			num(o.P, "%.3f"), se(o.P, "%.3f"))
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	fmt.Fprintf(w, "Variances: %s.\n", js.Variances)
	for _, s := range js.Warnings {
		fmt.Fprintf(w, "  note: %s\n", s)
	}

	fmt.Fprintln(w, "\nGoodness of fit of the CJS model phi(t) p(t) (Burnham et al. 1987 component tests):")
	if g := rep.GOF; g != nil {
		tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
		for _, t := range []open.GOFTotal{g.SR, g.SM, g.CT, g.CL, g.Overall} {
			if t.Components == 0 {
				fmt.Fprintf(tw, "  %s\tnot testable (too few animals)\t\t\t\n", t.Name)
				continue
			}
			fmt.Fprintf(tw, "  %s\tchi-square %.2f\t%d df\tP = %.3f\t\n", t.Name, t.ChiSquare, t.DF, t.P)
		}
		tw.Flush()
		fmt.Fprintf(w, "  %s\n", g.Recommendation)
		for _, s := range g.Warnings {
			fmt.Fprintf(w, "  note: %s\n", s)
		}
	} else {
		fmt.Fprintf(w, "  not run: %s\n", rep.GOFError)
	}
	fmt.Fprintf(w, "c-hat used for the model table: %.3f (from %s)\n", rep.CHat, rep.CHatSource)

	cjs := rep.CJS
	fmt.Fprintf(w, "\nCormack-Jolly-Seber models, ranked by %s (sample size: releases before the last occasion)\n", cjs.Criterion)
	if len(cjs.Groups) > 0 {
		fmt.Fprintf(w, "Groups: %s\n", strings.Join(cjs.Groups, ", "))
	}
	tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "model\tK\t-2 lnL\t%s\tdelta\tweight\t\n", cjs.Criterion)
	for _, m := range cjs.Models {
		flag := ""
		if m.Boundary {
			flag = "  (boundary estimate)"
		}
		crit := m.AICc
		if m.QAICc != nil {
			crit = *m.QAICc
		}
		fmt.Fprintf(tw, "%s\t%d\t%.2f\t%.2f\t%.2f\t%.3f\t%s\n", m.Name, m.Params, -2*m.LogLik, crit, m.Delta, m.Weight, flag)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	for _, f := range cjs.Failed {
		fmt.Fprintf(w, "  not fitted: %s\n", f)
	}
	if len(cjs.Models) > 0 {
		best := cjs.Models[0]
		fmt.Fprintf(w, "\nEstimates of the best model, %s:\n", best.Name)
		writeNamed(w, append(append(append([]estimators.Named(nil), best.Phi...), best.P...), best.Products...))
		for _, s := range best.Warnings {
			fmt.Fprintf(w, "  note: %s\n", s)
		}
	}
	fmt.Fprintln(w, "\nModel-averaged estimates (all models, Akaike weights):")
	writeNamed(w, cjs.Averaged)
	for _, s := range cjs.Warnings {
		fmt.Fprintf(w, "  note: %s\n", s)
	}

	if len(rep.Notes) > 0 {
		fmt.Fprintln(w, "\nData notes:")
		for _, n := range rep.Notes {
			fmt.Fprintf(w, "  - %s\n", n)
		}
	}
	fmt.Fprintln(w, "\nAssumptions:")
	for _, a := range js.Assumptions {
		fmt.Fprintf(w, "  - %s\n", a)
	}
	fmt.Fprintln(w, "\nCautions:")
	for _, c := range rep.Cautions {
		fmt.Fprintf(w, "  - %s\n", c)
	}
	return nil
}

func writeNamed(w io.Writer, ps []estimators.Named) {
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	for _, p := range ps {
		if !p.Identifiable {
			fmt.Fprintf(tw, "  %s\tnot identifiable\t\t\n", p.Name)
			continue
		}
		interval := "-"
		if p.Kind != estimators.CINone {
			interval = fmt.Sprintf("%.3f-%.3f", p.Low, p.High)
		}
		fmt.Fprintf(tw, "  %s\t%.3f\tSE %.3f\t95%% CI %s\n", p.Name, p.Estimate, p.SE, interval)
	}
	tw.Flush()
}

func num(v *estimators.Value, format string) string {
	if v == nil {
		return "-"
	}
	return fmt.Sprintf(format, v.Estimate)
}

func se(v *estimators.Value, format string) string {
	if v == nil || v.Kind == estimators.CINone {
		return "-"
	}
	return fmt.Sprintf(format, v.SE)
}

func ci(v *estimators.Value, format string) string {
	if v == nil || v.Kind == estimators.CINone {
		return "-"
	}
	return fmt.Sprintf(format+"-"+format, v.Low, v.High)
}
