// Package spatial turns where animals were caught into density and
// spatial-pattern figures: animals per hectare over an effective trapping
// area with a boundary strip, the dispersion of captures over stations
// (variance-to-mean ratio, Morisita's index and its standardized form),
// and the Clark-Evans nearest-neighbour ratio with Donnelly's edge
// correction.
//
// How the parts fit:
//
//	geometry.go    points in metres, convex hull, polygon area and perimeter,
//	               the Region (area and perimeter) a pattern lies in
//	project.go     WGS84 latitude/longitude to local metres for stations
//	               that have no grid coordinates
//	density.go     N over the grid area plus a boundary strip of width
//	               W = MMDM/2 or MMDM (Wilson & Anderson 1985)
//	dispersion.go  counts per station: variance-to-mean ratio, Morisita,
//	               standardized Morisita (Smith-Gill 1975)
//	nearest.go     Clark & Evans (1954) R with its z-test, Donnelly (1978)
//
// Everything is pure: slices in, result structs out, no I/O. Coordinates
// are metres on a local plane (x east, y north); areas are reported in
// hectares where a person reads them. Tests of pattern use a two-sided 5%
// level and say "clumped", "random" or "uniform" in words.
//
// Caveats: the boundary-strip density is only as good as the strip: MMDM
// from captures depends on trap spacing, grid size and the number of
// recaptures and tends to be too small when recaptures are few, which
// biases density upward (Wilson & Anderson 1985). Dispersion indices
// describe where animals were caught, which mixes where they live with
// where traps caught them; read them as a description of the captures.
package spatial
