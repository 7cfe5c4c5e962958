package closed

import (
	"math"
	"math/rand/v2"
	"testing"

	"tagtally/estimators"
)

// checkLocalMaximum confirms, without any optimiser, that x is a maximum of
// ll: no point of a grid of perturbations around x has a higher
// log-likelihood, and the gradient by central differences (written out
// here, independent of the models' analytic gradients) is close to zero.
//
// The grid: every parameter alone moved by ±0.001, ±0.003, ±0.01, ±0.03,
// ±0.1, ±0.3 on the working (log/logit) scale; every pair of parameters
// moved together by ±0.01 and ±0.1 in all four sign combinations; and 400
// random directions (fixed seed) at distances 0.005, 0.05 and 0.5. A full
// grid over 8-10 parameters would take too long; these perturbations
// cover every direction of the parameter space that matters for a maximum
// (each axis, each plane of two axes, and a sample of general directions).
func checkLocalMaximum(t *testing.T, name string, ll func([]float64) float64, x []float64, llFit float64) {
	t.Helper()
	k := len(x)
	at := make([]float64, k)
	l0 := ll(x)
	if math.Abs(l0-llFit) > 1e-9*(1+math.Abs(llFit)) {
		t.Fatalf("%s: lnL at the fitted point %.12f, reported %.12f", name, l0, llFit)
	}
	// A point "beats" the fit when it is higher by more than rounding.
	slack := 1e-10 * (1 + math.Abs(l0))
	worst, worstAt := math.Inf(-1), ""
	try := func(label string) {
		v := ll(at)
		if math.IsNaN(v) {
			t.Errorf("%s: lnL is NaN at %s", name, label)
			return
		}
		if v-l0 > worst {
			worst, worstAt = v-l0, label
		}
	}
	reset := func() { copy(at, x) }
	for i := 0; i < k; i++ {
		for _, d := range []float64{0.001, 0.003, 0.01, 0.03, 0.1, 0.3} {
			for _, s := range []float64{-1, 1} {
				reset()
				at[i] += s * d
				try("one axis")
			}
		}
	}
	for i := 0; i < k; i++ {
		for j := i + 1; j < k; j++ {
			for _, d := range []float64{0.01, 0.1} {
				for _, si := range []float64{-1, 1} {
					for _, sj := range []float64{-1, 1} {
						reset()
						at[i] += si * d
						at[j] += sj * d
						try("two axes")
					}
				}
			}
		}
	}
	rng := rand.New(rand.NewPCG(7, uint64(k)))
	dir := make([]float64, k)
	for r := 0; r < 400; r++ {
		norm := 0.0
		for i := range dir {
			dir[i] = rng.NormFloat64()
			norm += dir[i] * dir[i]
		}
		norm = math.Sqrt(norm)
		for _, d := range []float64{0.005, 0.05, 0.5} {
			for i := range at {
				at[i] = x[i] + d*dir[i]/norm
			}
			try("random direction")
		}
	}
	if worst > slack {
		t.Errorf("%s: a perturbation (%s) raises lnL by %.3g above the fit", name, worstAt, worst)
	}
	// Central differences with step 1e-4: truncation error is about
	// h²/6 times the third derivative, far below the tolerance. The
	// optimisers stop at a gradient of order 1e-6 relative to the
	// log-likelihood's scale (Mt1 animals); 1e-3 in absolute terms is a
	// generous bound for lnL values of several hundred.
	const h = 1e-4
	for i := 0; i < k; i++ {
		reset()
		at[i] = x[i] + h
		up := ll(at)
		at[i] = x[i] - h
		down := ll(at)
		if g := (up - down) / (2 * h); math.Abs(g) > 1e-3 {
			t.Errorf("%s: d lnL/dx[%d] = %.3g at the fit", name, i, g)
		}
	}
}

// TestLikelihoodLocalMaximum runs checkLocalMaximum on every
// full-likelihood model (M0, Mt, Mb, Mh, Mth, Mtb) and on Huggins' model
// with covariates and time effects, at the fits that the exported
// functions report.
func TestLikelihoodLocalMaximum(t *testing.T) {
	sets := []struct {
		name string
		h    *estimators.Histories
	}{
		{"invented", readLikelihoodHistories(t, false)},
		{"invented with losses", readLikelihoodHistories(t, true)},
		{"cottontail", readCottontail(t)},
	}
	for _, set := range sets {
		for _, name := range []string{"M0", "Mt", "Mb", "Mh", "Mth", "Mtb"} {
			if set.name == "cottontail" && name != "M0" && name != "Mh" {
				continue // cottontail histories are arranged from frequencies: only M0 and Mh apply
			}
			t.Run(set.name+"/"+name, func(t *testing.T) {
				b := builders[name]
				res, err := b.fit(set.h)
				if err != nil {
					t.Fatal(err)
				}
				m, starts, err := b.build(set.h)
				if err != nil {
					t.Fatal(err)
				}
				f, err := bestFit(m, starts)
				if err != nil {
					t.Fatal(err)
				}
				if f.LogLik != res.LogLik {
					t.Fatalf("refit lnL %.12f differs from the exported %.12f", f.LogLik, res.LogLik)
				}
				if n := float64(set.h.Animals()) + math.Exp(f.X[0]); math.Abs(n-res.N.Estimate) > 1e-9*n {
					t.Fatalf("N at the refit %.6f, exported %.6f", n, res.N.Estimate)
				}
				checkLocalMaximum(t, name, m.ll, f.X, res.LogLik)
			})
		}
	}
	for _, c := range []struct {
		name   string
		lost   bool
		covs   []string
		time   bool
		animal func(t *testing.T) *estimators.Histories
	}{
		{"male+mass+time", false, []string{"male", "mass"}, true, nil},
		{"male+mass+time/losses", true, []string{"male", "mass"}, true, nil},
		{"mass", false, []string{"mass"}, false, nil},
		{"time, Krebs sunfish", false, nil, true, func(*testing.T) *estimators.Histories { return krebsSunfishHistories() }},
		{"constant, cottontail", false, nil, false, func(t *testing.T) *estimators.Histories { return readCottontail(t) }},
	} {
		t.Run("Huggins "+c.name, func(t *testing.T) {
			h := readLikelihoodHistories(t, c.lost)
			if c.animal != nil {
				h = c.animal(t)
			}
			res, err := Huggins(h, c.covs, c.time)
			if err != nil {
				t.Fatal(err)
			}
			ev, _, mean, sd, err := newHugginsEval("Huggins", h, c.covs, c.time)
			if err != nil {
				t.Fatal(err)
			}
			// Back to the working scale (standardised covariates) from the
			// reported coefficients: β'_c = β_c·s_c, β'_0 = β_0 + Σ β_c m_c.
			x := make([]float64, len(res.Parameters))
			for i, p := range res.Parameters {
				x[i] = p.Estimate
			}
			for ci := range c.covs {
				x[0] += x[1+ci] * mean[ci]
				x[1+ci] *= sd[ci]
			}
			checkLocalMaximum(t, "Huggins "+c.name, ev.ll, x, res.LogLik)
		})
	}
}
