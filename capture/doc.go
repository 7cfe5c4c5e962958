// Package capture holds tagtally's domain: studies, occasions, stations and
// capture records, their validation, the bbolt store that keeps them, and
// the capture histories, per-occasion summaries and m-arrays built from
// them for the estimators.
package capture
