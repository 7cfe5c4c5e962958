// Package demography describes what a marked population is made of: the
// sex ratio with an exact interval and test, the age-class structure on
// each occasion, the capture-frequency distribution and body mass by sex
// and age.
//
// How the parts fit:
//
//	binomial.go   exact (Clopper-Pearson) interval and exact binomial test,
//	              shared by the sex ratio and the age proportions
//	sexratio.go   males and females among the animals caught
//	age.go        counts and proportions per age class per occasion
//	frequency.go  f_k, the number of animals caught exactly k times
//	mass.go       mean, SD, SE and n of body mass by sex and age
//
// Survival by sex or age group is not here: it comes from the
// Cormack-Jolly-Seber group models of package estimators/open
// (CJSGroups with one m-array per group, built by GroupMArrays from
// Histories.Groups set to each animal's sex or age class), which already
// report survival per group with its SE and interval.
//
// Everything is pure: slices in, result structs out, no I/O. The caller
// decides which records count (one per animal for the sex ratio and mass,
// one per animal per occasion for age structure); each function's doc says
// what it expects. Proportions among captured animals describe the
// catch; they describe the population only if the sexes and age classes
// are equally catchable, which the results state as an assumption.
package demography
