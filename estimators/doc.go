// Package estimators holds what every population estimator in tagtally
// shares: the result types (an estimate with its standard error and
// confidence interval), the errors for data that cannot support an
// estimate, information-criterion model selection and model averaging,
// and the numerical optimiser set-up used by the likelihood models.
//
// The estimators themselves live in sub-packages, each with one job:
//
//	closed      closed-population abundance (two-sample, multiple census,
//	            Otis et al. 1978 likelihood models, jackknife, Chao, Huggins)
//	open        open-population models (Jolly-Seber, Cormack-Jolly-Seber,
//	            goodness of fit, robust design, removal sampling)
//	spatial     density with a boundary strip, dispersion indices
//	demography  sex ratio, age structure, capture frequencies, mass summaries
//
// Everything here is pure: plain inputs in, result structs out, no I/O,
// clock or global state. Nothing in this tree imports storage or HTTP code;
// turning stored captures into these inputs is the caller's job.
package estimators
