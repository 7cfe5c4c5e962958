// Package analysis connects stored or imported capture data to the
// estimators: it turns a capture.HistorySet (built from the store or read
// from a history CSV) into the estimators.Histories matrix the
// closed-population estimators take.
//
// It is a thin adapter on purpose: package capture knows nothing of
// statistics and package estimators nothing of storage, so the translation
// between them (which covariates are complete enough to use, how sex
// becomes a 0/1 covariate) lives here, in one place, with its choices
// written down.
package analysis
