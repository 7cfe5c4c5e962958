// Package closed estimates the size N of a closed population: one in
// which no animal is born, dies, arrives or leaves between the first and
// the last sampling occasion.
//
// Several families of method live here, each returning an
// *estimators.Result (estimate, standard error, confidence interval and its
// kind, assumptions, references):
//
//   - two samples (twosample.go): Lincoln-Petersen, Chapman's
//     bias-corrected form with Seber's variance, Bailey's binomial form,
//     with normal, Poisson or binomial intervals on the recapture count;
//   - multiple census counts (census.go): Schnabel (with Chapman's +1
//     form) and Schumacher-Eschmeyer, from per-occasion catches;
//   - capture frequencies (jackknife.go, chao.go): the Burnham-Overton
//     jackknife for heterogeneous capture probabilities, and Chao's
//     estimators for Mh, Mt and Mth with the log-normal interval of Chao
//     (1987), whose lower bound never falls below the number caught;
//   - removal (depletion) sampling without release (removal.go): Zippin's
//     maximum-likelihood estimator and Carle & Strub's weighted form;
//   - the likelihood models of Otis et al. (1978) and Huggins' conditional
//     likelihood (likelihood*.go and related files);
//   - the model table (table.go), which runs everything that applies to a
//     set of capture histories, ranks the likelihood models by AICc and
//     gives the model-averaged N; a model that fails is reported in its
//     row with the reason instead of stopping the table.
//
// Every function checks its input and wraps the sentinel errors of package
// estimators (ErrNoData, ErrNoRecaptures, ErrTooFewOccasions,
// ErrInvalidInput) with a prefix naming the method. An estimate on the
// edge of its range (N equal to the number caught, no depletion left to
// measure) is returned with Result.Boundary set and a warning, never as a
// silent NaN.
//
// Caveat for users: every estimate here is only as good as its
// assumptions, which each Result lists. Field work that produces these data
// needs the permits, animal-welfare approval and handling training that
// local rules and licensed practice require.
package closed
