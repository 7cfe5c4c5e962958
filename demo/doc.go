// Package demo builds tagtally's demonstration study: an invented
// live-trapping study of wood mice on an 8 x 8 grid at "Quillmoor Heath"
// (a made-up place), run by an invented three-person crew, with an invented
// ear-tag series QH-0001, QH-0002, ...
//
// The captures are simulated with a fixed seed, so every build gives the
// same study and the same records (and the same record IDs). The
// simulation is a spatial one: every animal has a home-range centre, its
// chance of entering a trap falls off with distance (a half-normal hazard,
// as in Efford 2004, Oikos 106:598-610), animals differ in how catchable
// they are (individual heterogeneity, model Mh of Otis et al. 1978), and an
// animal caught once is more likely to enter a trap again (trap-happiness,
// the behavioural response of model Mb). Traps hold one animal a night.
//
// The data are meant to be realistic enough to exercise the estimators and
// the data checks, so they include a few retags, a few losses on capture
// (died in the trap) and a handful of deliberate problems that a
// coordinator should find and resolve:
//
//   - a recapture of a tag that was never marked (a misread tag),
//   - an animal whose sex was recorded differently on two captures,
//   - a capture with no station,
//   - a mass far outside the species' plausible range (a slipped decimal),
//   - a likely duplicate: the same animal entered by two crew members on
//     two phones minutes apart.
//
// Build returns the study and the records; Load writes them into a store
// and is safe to run again (it adds only what is missing).
package demo
