package open

import (
	"fmt"
	"math"
	"testing"

	"tagtally/estimators"
)

// checkAtMaximum checks, without the production gradient or optimiser,
// that x is a maximum of ll:
//
//   - the central-difference derivative of ll along each working
//     parameter, with a step of its own (1e-5, not the optimiser's), is
//     negligible against the curvature: |g_k| / sqrt(-H_kk) < 1e-3, i.e.
//     the maximum along that direction is within a thousandth of a
//     standard error of x_k (H_kk by a central second difference);
//   - moving any single parameter by ±0.1 standard error, and by ±1e-3,
//     does not raise ll.
//
// A parameter whose curvature is negligible (|H_kk| below 1e-8 per unit
// of ll, a probability pushed to 0 or 1 on the logit scale) has no
// standard error; for it only |g_k| < 1e-4 and the ±1e-3 moves are
// checked.
func checkAtMaximum(t *testing.T, name string, ll func([]float64) float64, x []float64, names []string) {
	t.Helper()
	f0 := ll(x)
	at := func(k int, d float64) float64 {
		y := append([]float64(nil), x...)
		y[k] += d
		return ll(y)
	}
	label := func(k int) string {
		if k < len(names) {
			return names[k]
		}
		return fmt.Sprintf("x[%d]", k)
	}
	const h = 1e-5
	const hh = 1e-3
	worst, boundary := 0.0, 0
	defer func() { t.Logf("%s: largest |score|·SE %.2g; %d parameters at a boundary", name, worst, boundary) }()
	for k := range x {
		fp, fm := at(k, h), at(k, -h)
		g := (fp - fm) / (2 * h)
		hess := (at(k, hh) - 2*f0 + at(k, -hh)) / (hh * hh)
		moves := []float64{-1e-3, 1e-3}
		if -hess > 1e-8*math.Max(1, math.Abs(f0)) {
			se := 1 / math.Sqrt(-hess)
			r := math.Abs(g) * se
			worst = math.Max(worst, r)
			if r > 1e-3 {
				t.Errorf("%s: d lnL/d %s = %.3g at the fit, %.3g standard errors from the maximum along it", name, label(k), g, r)
			}
			moves = append(moves, -0.1*se, 0.1*se)
		} else if boundary++; math.Abs(g) > 1e-4 {
			t.Errorf("%s: d lnL/d %s = %.3g at the fit, with no curvature (boundary)", name, label(k), g)
		}
		for _, d := range moves {
			if v := at(k, d); v > f0+1e-9*math.Max(1, math.Abs(f0)) {
				t.Errorf("%s: moving %s by %.3g raises lnL from %.8f to %.8f", name, label(k), d, f0, v)
			}
		}
	}
}

// TestCJSAtMaximum: the CJS fits of CJSGroups are maxima of the
// likelihood by checkAtMaximum, on the dipper m-array and on the two-group
// m-arrays, for every standard model.
func TestCJSAtMaximum(t *testing.T) {
	names, ms := readMArrayCSV(t, "testdata/groups-marray.csv")
	cases := []struct {
		what   string
		groups []string
		ms     []MArray
		specs  []ModelSpec
	}{
		{"dipper", []string{""}, []MArray{dipper(t)}, StandardModels(1)},
		{"two groups", names, ms, StandardModels(2)},
	}
	for _, c := range cases {
		for _, spec := range c.specs {
			d := newDesign(c.groups, c.ms[0].Occasions(), spec.Phi, spec.P)
			lik := &cjsLik{d: d}
			releases := 0
			for _, m := range c.ms {
				lik.data = append(lik.data, totals(m))
				for _, r := range m.Released[:m.Occasions()-1] {
					releases += r
				}
			}
			// The production fit, reached as CJSGroups reaches it.
			res, err := CJSGroups(c.ms, c.groups, spec.Phi, spec.P)
			if err != nil {
				t.Fatal(err)
			}
			x0 := make([]float64, d.nCoef)
			for k := range x0 {
				x0[k] = 0.5
			}
			scale := 1 / float64(releases)
			fit, err := estimators.Maximize(func(x []float64) float64 { return lik.logLik(x) * scale },
				func(g, x []float64) {
					lik.grad(g, x)
					for k := range g {
						g[k] *= scale
					}
				}, x0)
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(fit.LogLik/scale-res.LogLik) > 1e-9*math.Abs(res.LogLik) {
				t.Fatalf("%s %s: refit lnL %.8f, CJSGroups %.8f", c.what, spec, fit.LogLik/scale, res.LogLik)
			}
			checkAtMaximum(t, c.what+" CJS "+spec.String(), lik.logLik, fit.X, d.coefNames)
		}
	}
}

// TestJSMLAtMaximum: the Jolly-Seber likelihood fits are maxima by
// checkAtMaximum (the existing TestJSMLGradient compares the analytic
// gradient with differences at arbitrary points; this checks the fit).
func TestJSMLAtMaximum(t *testing.T) {
	h := jsmlReferenceSim()
	for _, s := range [][2]Structure{{Constant, Constant}, {Time, Constant}, {Constant, Time}, {Time, Time}} {
		m := newJSModel(h.Occasions(), s[0], s[1], jsStats(h))
		fit, err := estimators.Maximize(m.logLik, m.grad, m.start())
		if err != nil {
			t.Fatal(err)
		}
		res, err := JollySeberML(h, s[0], s[1])
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(fit.LogLik-res.Result.LogLik) > 1e-9*math.Abs(res.Result.LogLik) {
			t.Fatalf("phi(%s) p(%s): refit lnL %.8f, JollySeberML %.8f", s[0], s[1], fit.LogLik, res.Result.LogLik)
		}
		checkAtMaximum(t, "JS-ML phi("+s[0].String()+") p("+s[1].String()+")", m.logLik, fit.X, nil)
	}
}

// TestRobustMLAtMaximum: the robust-design likelihood fits (no analytic
// gradient in production: the optimiser differentiates numerically) are
// maxima by checkAtMaximum, for both emigration models and M0 and Mt
// within primaries, on the reference simulation of
// testdata/robust_histories.csv.
func TestRobustMLAtMaximum(t *testing.T) {
	h, primary := robustReferenceSim()
	groups, err := primaryGroups(primary, h.Occasions())
	if err != nil {
		t.Fatal(err)
	}
	for _, model := range []RobustModel{
		{Emigration: NoEmigration},
		{Emigration: RandomEmigration},
		{Emigration: NoEmigration, TimeWithin: true},
		{Emigration: RandomEmigration, TimeWithin: true},
	} {
		m := newRobustModel(robustStats(h, groups), model.Emigration == RandomEmigration, model.TimeWithin)
		fit, err := estimators.Maximize(m.logLik, nil, m.start())
		if err != nil {
			t.Fatal(err)
		}
		res, err := RobustDesignML(h, primary, model)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(fit.LogLik-res.Result.LogLik) > 1e-9*math.Abs(res.Result.LogLik) {
			t.Fatalf("%s: refit lnL %.8f, RobustDesignML %.8f", model, fit.LogLik, res.Result.LogLik)
		}
		checkAtMaximum(t, "robust design "+model.String(), m.logLik, fit.X, nil)
	}
}
