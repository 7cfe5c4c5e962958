package estimators

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/diff/fd"
	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/optimize"
)

// Fit is the outcome of a maximum-likelihood fit on the working
// (unbounded, e.g. log or logit) scale.
type Fit struct {
	// X is the maximising parameter vector on the working scale.
	X []float64
	// LogLik is the log-likelihood at X.
	LogLik float64
	// Cov is the inverse of the observed information (minus the Hessian of
	// the log-likelihood) at X, on the working scale. Nil when the
	// information matrix is singular: some parameter is not identifiable or
	// sits on a boundary.
	Cov *mat.SymDense
	// Evaluations counts log-likelihood evaluations, for benchmarks.
	Evaluations int
}

// SE returns the standard error of working parameter i, or NaN when the
// covariance is unavailable or not positive.
func (f *Fit) SE(i int) float64 {
	if f.Cov == nil {
		return math.NaN()
	}
	v := f.Cov.At(i, i)
	if !(v > 0) {
		return math.NaN()
	}
	return math.Sqrt(v)
}

// Maximize maximises logLik from x0 with gonum's BFGS (a quasi-Newton
// method with a line search satisfying the Wolfe conditions), using a
// central finite-difference gradient unless grad is given, then computes
// the observed information by finite differences at the maximum.
//
// logLik must return -Inf (not NaN) where the parameters are impossible;
// NaN is treated as -Inf. Parameters should be on an unbounded scale (log
// for sizes, logit for probabilities) so the search needs no constraints.
//
// If BFGS stops without convergence the Nelder-Mead simplex method is tried
// from the best point found; ErrNotConverged is returned only if both fail.
func Maximize(logLik func(x []float64) float64, grad func(g, x []float64), x0 []float64) (*Fit, error) {
	evals := 0
	negLL := func(x []float64) float64 {
		evals++
		v := logLik(x)
		if math.IsNaN(v) || math.IsInf(v, 1) {
			return math.Inf(1)
		}
		return -v
	}
	var negGrad func(g, x []float64)
	if grad != nil {
		negGrad = func(g, x []float64) {
			grad(g, x)
			for i := range g {
				g[i] = -g[i]
			}
		}
	} else {
		negGrad = func(g, x []float64) {
			fd.Gradient(g, negLL, x, &fd.Settings{Formula: fd.Central})
		}
	}
	problem := optimize.Problem{Func: negLL, Grad: negGrad}
	settings := &optimize.Settings{
		GradientThreshold: 1e-7,
		MajorIterations:   2000,
		FuncEvaluations:   200000,
	}
	start := append([]float64(nil), x0...)
	res, err := optimize.Minimize(problem, start, settings, &optimize.BFGS{})
	ok := err == nil && res != nil && !math.IsInf(res.F, 0) && !math.IsNaN(res.F)
	if !ok || res.Status != optimize.GradientThreshold {
		from := start
		if res != nil && !math.IsInf(res.F, 0) && !math.IsNaN(res.F) {
			from = res.X
		}
		nm, nmErr := optimize.Minimize(optimize.Problem{Func: negLL}, from, &optimize.Settings{
			MajorIterations: 20000, FuncEvaluations: 200000, Converger: &optimize.FunctionConverge{Absolute: 1e-10, Iterations: 200},
		}, &optimize.NelderMead{})
		if nmErr == nil && nm != nil && !math.IsInf(nm.F, 0) && (!ok || nm.F < res.F) {
			// Polish with BFGS from the simplex optimum.
			polish, pErr := optimize.Minimize(problem, nm.X, settings, &optimize.BFGS{})
			if pErr == nil && polish != nil && polish.F <= nm.F {
				res, ok = polish, true
			} else {
				res, ok = nm, true
			}
		}
	}
	if !ok {
		return nil, fmt.Errorf("%w: %v", ErrNotConverged, err)
	}
	fit := &Fit{X: res.X, LogLik: -res.F, Evaluations: evals}
	fit.Cov = InverseInformation(logLik, res.X)
	return fit, nil
}

// InverseInformation returns the inverse of the observed information matrix
// -H (H the Hessian of logLik at x, by central finite differences), or nil
// when it is not positive definite.
func InverseInformation(logLik func(x []float64) float64, x []float64) *mat.SymDense {
	n := len(x)
	h := mat.NewSymDense(n, nil)
	fd.Hessian(h, func(x []float64) float64 { return -logLik(x) }, x, &fd.Settings{Formula: fd.Central})
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			if math.IsNaN(h.At(i, j)) || math.IsInf(h.At(i, j), 0) {
				return nil
			}
		}
	}
	var chol mat.Cholesky
	if !chol.Factorize(h) {
		return nil
	}
	var inv mat.SymDense
	if err := chol.InverseTo(&inv); err != nil {
		return nil
	}
	return &inv
}

// Logit and Expit convert probabilities to and from the working scale.
func Logit(p float64) float64 { return math.Log(p / (1 - p)) }

// Expit is the inverse of Logit.
func Expit(x float64) float64 { return 1 / (1 + math.Exp(-x)) }
