package closed

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/diff/fd"
	"gonum.org/v1/gonum/optimize"

	"tagtally/estimators"
)

// profileInterval is the 95% profile-likelihood interval for N (Venzon &
// Moolgavkar 1988; used for N by Otis et al. 1978 and Pledger 2000): the
// set of N whose profile log-likelihood
//
//	lnL_p(N) = max over the other parameters of lnL(N, ·)
//
// satisfies 2(lnL_max − lnL_p(N)) <= χ²₁(0.95) = 3.8415. Each end is found
// by root-finding on N (the Illinois variant of regula falsi, bracketed,
// on ln(N − Mt1) above the estimate and on N − Mt1 below it), maximising
// over the other parameters at every trial N.
//
// Degenerate cases: when the deviance at N = Mt1 (f0 = 0) is already below
// the cut-off, or N̂ sits at Mt1, the lower end is Mt1; it is never below
// Mt1. When the deviance has not reached the cut-off by
// N = Mt1 + maxF0(Mt1), the upper end is reported there with a
// warning (the interval is open above: JSON and spreadsheets cannot carry
// an infinite bound, so the searched limit is given and said to be one).
func profileInterval(m *model, xhat []float64, llmax float64) (estimators.Interval, []string) {
	mt1 := float64(m.st.mt1)
	fhat := math.Exp(xhat[0])
	iv := estimators.Interval{Low: mt1 + fhat, High: mt1 + fhat, Level: estimators.DefaultLevel, Kind: estimators.CIProfile}
	var warns []string
	warm := append([]float64(nil), xhat[1:]...)
	failed := func(err error) (estimators.Interval, []string) {
		iv.Kind = estimators.CINone
		return iv, append(warns, fmt.Sprintf("the profile-likelihood interval for N could not be computed: %v", err))
	}
	dev := func(f0 float64) (float64, error) {
		v, x, err := m.profile(f0, warm)
		if err != nil {
			return 0, err
		}
		copy(warm, x)
		d := 2 * (llmax - v)
		if d < 0 {
			d = 0 // the profile maximum can only match lnL_max up to the optimiser's tolerance
		}
		return d, nil
	}

	// Lower end, on the f0 scale in [0, fhat].
	if fhat < 1e-3 {
		iv.Low = mt1
	} else {
		d0, err := dev(0)
		if err != nil {
			return failed(err)
		}
		if d0 <= chiSq1At95 {
			iv.Low = mt1
		} else {
			copy(warm, xhat[1:])
			root, err := illinois(func(f float64) (float64, error) {
				d, err := dev(f)
				return d - chiSq1At95, err
			}, 0, d0-chiSq1At95, fhat, -chiSq1At95, 1e-4*(1+fhat))
			if err != nil {
				return failed(err)
			}
			iv.Low = mt1 + root
		}
	}

	// Upper end, on the s = ln f0 scale, bracketed by doubling f0.
	copy(warm, xhat[1:])
	sLo := math.Log(math.Max(fhat, 1e-3))
	gLo := -chiSq1At95
	step := math.Ln2
	if fhat < 1 {
		step = math.Log(2 / math.Max(fhat, 1e-3)) // jump to f0 = 2 first
	}
	sHi := sLo + step
	limit := math.Log(maxF0(m.st.mt1))
	if sHi > limit {
		sHi = limit
	}
	var gHi float64
	for {
		if sHi <= sLo {
			iv.High = mt1 + math.Exp(limit)
			warns = append(warns, fmt.Sprintf("the profile likelihood for N is still within the 95%% cut-off at N = %.0f, so the interval is open above (the data do not bound N from above); the upper end shown is where the search stopped, not a confidence limit", iv.High))
			return iv, warns
		}
		d, err := dev(math.Exp(sHi))
		if err != nil {
			return failed(err)
		}
		gHi = d - chiSq1At95
		if gHi > 0 {
			break
		}
		if sHi >= limit {
			iv.High = mt1 + math.Exp(limit)
			warns = append(warns, fmt.Sprintf("the profile likelihood for N is still within the 95%% cut-off at N = %.0f, so the interval is open above (the data do not bound N from above); the upper end shown is where the search stopped, not a confidence limit", iv.High))
			return iv, warns
		}
		sLo, gLo = sHi, gHi
		sHi = math.Min(sHi+math.Ln2, limit)
	}
	root, err := illinois(func(s float64) (float64, error) {
		d, err := dev(math.Exp(s))
		return d - chiSq1At95, err
	}, sLo, gLo, sHi, gHi, 1e-6)
	if err != nil {
		return failed(err)
	}
	iv.High = mt1 + math.Exp(root)
	return iv, warns
}

// illinois finds a root of g in the bracket [a, b] where g(a) and g(b)
// have opposite signs, by the Illinois modification of regula falsi
// (Dowell & Jarratt 1971), stopping when the bracket is narrower than tol.
func illinois(g func(float64) (float64, error), a, ga, b, gb, tol float64) (float64, error) {
	if ga*gb > 0 {
		return 0, fmt.Errorf("root not bracketed")
	}
	side := 0
	for i := 0; i < 100; i++ {
		c := (a*gb - b*ga) / (gb - ga)
		if !(c > math.Min(a, b) && c < math.Max(a, b)) {
			c = (a + b) / 2
		}
		gc, err := g(c)
		if err != nil {
			return 0, err
		}
		if gc == 0 || math.Abs(b-a) < tol {
			return c, nil
		}
		if gc*gb < 0 {
			a, ga = b, gb
			b, gb = c, gc
			side = 0
		} else {
			b, gb = c, gc
			if side == -1 {
				ga /= 2
			}
			side = -1
		}
		if math.Abs(b-a) < tol {
			return b, nil
		}
	}
	return b, nil
}

// profileByOptimisation maximises m.ll over x[1:] with f0 fixed, with
// gonum's BFGS (the same optimiser as the main fit; the observed
// information is not needed here, so estimators.Maximize's Hessian step is
// skipped). It uses m.grad when present, central differences otherwise.
func profileByOptimisation(m *model, f0 float64, warm []float64) (float64, []float64, error) {
	k := len(warm) + 1
	s := math.Log(f0)
	scale := float64(m.st.mt1) // as in maximizeScaled
	full := make([]float64, k)
	full[0] = s
	negLL := func(x []float64) float64 {
		copy(full[1:], x)
		v := m.ll(full)
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return math.Inf(1)
		}
		return -v / scale
	}
	var grad func(g, x []float64)
	if m.grad != nil {
		gfull := make([]float64, k)
		grad = func(g, x []float64) {
			copy(full[1:], x)
			m.grad(gfull, full)
			for i := range g {
				g[i] = -gfull[i+1] / scale
			}
		}
	} else {
		grad = func(g, x []float64) { fd.Gradient(g, negLL, x, &fd.Settings{Formula: fd.Central}) }
	}
	start := append([]float64(nil), warm...)
	res, err := optimize.Minimize(optimize.Problem{Func: negLL, Grad: grad}, start, &optimize.Settings{
		GradientThreshold: 1e-6, MajorIterations: 1000,
	}, &optimize.BFGS{})
	if res == nil || math.IsInf(res.F, 0) || math.IsNaN(res.F) {
		return 0, nil, fmt.Errorf("%w: profile fit at N = %.1f: %v", estimators.ErrNotConverged, float64(m.st.mt1)+f0, err)
	}
	return -res.F * scale, res.X, nil
}
