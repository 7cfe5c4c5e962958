// Package capture holds tagtally's domain: studies, occasions, stations and
// capture records, their validation, the bbolt store that keeps them, and
// the capture histories, per-occasion summaries and m-arrays built from
// them for the estimators.
//
// # Parts
//
//   - types.go: the records (Study, Occasion, Station, Capture, Revision)
//     and their enums. Capture carries the Revision that sync fills in, so
//     sync needs no schema change.
//   - validate.go: Study.Validate, ValidateCapture and DeriveOccasion.
//     A rejected field is a *ValidationError{Field, Message} wrapping
//     ErrInvalid (the HTTP layer answers 422 with both). Problems that a
//     crew may be right about (a recapture of a tag never marked, a mass
//     outside the usual range) are not rejections but Findings returned
//     with the stored record: field data is messy and the coordinator
//     decides.
//   - store.go, tx.go: Store, one bbolt file. Domain methods (CreateStudy,
//     CreateCapture, ListCaptures, ...) are one transaction each and return
//     copies. Store.Update and Store.View hand a *Tx to packages built on
//     the store (sync), so they can write capture records and their own
//     buckets in the same transaction; Tx documents the rules. Schema
//     migrations are an ordered slice applied at Open; the schema version
//     is the slice's length.
//   - history.go: BuildHistories turns records into one row per animal (a
//     tag chain), with losses on capture and covariates; HistorySet.Summary
//     and HistorySet.MArray give the tables open- and closed-population
//     estimators start from. Package capture does not import the
//     estimators; a small adapter copies a HistorySet into their input.
//   - historycsv.go: a plain CSV file of histories (id,history,...), for
//     data prepared elsewhere and for exchange.
//   - storetest: opens a store in a test's temporary directory and checks
//     its consistency at cleanup.
//
// # Performance
//
// Capture keys are the study ID and a UUID v7, so inserts are
// append-mostly; the captures bucket is written with FillPercent 0.9.
// Write in batches (PutCaptures, 500 to 5,000 records), never one
// transaction per record. The tag index is keyed by tag and so written
// at random places; it costs most of the difference between PutCaptures
// and a bare bbolt insert (BenchmarkPutCaptures reports both).
//
// # Caveats
//
// A capture's stored Occasion is derived when it is written. If a study's
// occasion windows change later, stored values are not rewritten;
// BuildHistories derives occasions afresh from the current windows for
// every record whose occasion was not set by hand. Findings are a snapshot
// taken when the record is written, against the records stored then;
// records synced later can make them stale.
package capture
