package spatial

import (
	"fmt"
	"math"
	"sort"

	"gonum.org/v1/gonum/stat/distuv"

	"tagtally/estimators"
)

// NearestNeighbour is the Clark-Evans ratio for a mapped point pattern.
type NearestNeighbour struct {
	Method string `json:"method"`
	Points int    `json:"points"`
	// DensityPerHa is points per hectare of the region.
	DensityPerHa float64 `json:"density_per_ha"`
	// Observed is the mean distance (m) from each point to its nearest
	// neighbour, r_A.
	Observed float64 `json:"observed_mean_m"`
	// Expected is r_E, the mean nearest-neighbour distance (m) of a
	// Poisson pattern of the same density (edge-corrected when asked).
	Expected float64 `json:"expected_mean_m"`
	// SE is the standard error of r_A under the Poisson pattern.
	SE float64 `json:"se_m"`
	// R is r_A / r_E: 1 random, toward 0 clumped, up to 2.1491 for a
	// hexagonal lattice.
	R float64 `json:"R"`
	// Test is z = (r_A - r_E)/SE referred to the standard normal,
	// two-sided; R < 1 reads clumped, R > 1 uniform.
	Test           Test     `json:"test"`
	EdgeCorrection string   `json:"edge_correction"`
	Assumptions    []string `json:"assumptions"`
	Warnings       []string `json:"warnings,omitempty"`
	References     []string `json:"references"`
}

// Edge corrections for ClarkEvans.
const (
	// EdgeNone is the original test of Clark & Evans (1954), which assumes
	// a boundary strip or an unbounded region; without one, R is biased
	// upward.
	EdgeNone = "none"
	// EdgeDonnelly is Donnelly's (1978) correction for a bounded region.
	EdgeDonnelly = "Donnelly (1978)"
)

// ClarkEvans computes the nearest-neighbour ratio R of Clark & Evans
// (1954) for points (metres) mapped in a region, with its z-test. Without
// edge correction
//
//	r_E = 1 / (2 sqrt(ρ)),  SE = 0.26136 / sqrt(n ρ),  ρ = n / A
//
// (0.26136 is sqrt((4-π)/(4π)) rounded; the exact value is used)
// and with Donnelly's (1978) correction for a region of area A and
// perimeter P (derived by simulation for rectangles, used for other
// compact polygons; Krebs 1999, ch. 6)
//
//	r_E = 0.5 sqrt(A/n) + (0.0514 + 0.041/sqrt(n)) P/n
//	SE  = sqrt(0.0703 A/n² + 0.037 P sqrt(A/n⁵))
//
// R = r_A/r_E and z = (r_A - r_E)/SE, two-sided against the standard
// normal. Donnelly's simulations covered patterns of about 7 points or
// more (as recalled, not checked against the original); a warning says
// when n is smaller. The tests check this SE against the simulated spread
// of r_A for Poisson patterns in a square (within 2%). Every point must lie in the region: a
// pattern whose convex hull is larger than the region's area is refused.
// Fewer than 2 points is ErrNoData.
func ClarkEvans(points []Point, region Region, donnelly bool) (*NearestNeighbour, error) {
	const prefix = "Clark-Evans nearest-neighbour ratio"
	n := len(points)
	if n < 2 {
		return nil, fmt.Errorf("%s: %w: needs at least 2 points, got %d", prefix, estimators.ErrNoData, n)
	}
	if err := checkPoints("point", points); err != nil {
		return nil, fmt.Errorf("%s: %w", prefix, err)
	}
	a, p := region.Area, region.Perimeter
	if !(a > 0) || math.IsInf(a, 0) || math.IsNaN(p) || p < 0 || math.IsInf(p, 0) {
		return nil, fmt.Errorf("%s: region area %v m² and perimeter %v m must be positive and finite: %w",
			prefix, a, p, estimators.ErrInvalidInput)
	}
	if donnelly && p < 2*math.Sqrt(math.Pi*a)*(1-1e-9) {
		return nil, fmt.Errorf("%s: a region of %v m² cannot have a perimeter of only %v m (a circle needs %.4g): %w",
			prefix, a, p, 2*math.Sqrt(math.Pi*a), estimators.ErrInvalidInput)
	}
	if h := PolygonArea(ConvexHull(points)); h > a*(1+1e-9) {
		return nil, fmt.Errorf("%s: the points spread over %.4g m², more than the region's %.4g m²; some lie outside it: %w",
			prefix, h, a, estimators.ErrInvalidInput)
	}
	nf := float64(n)
	nn := NearestNeighbourDistances(points)
	ra := meanOf(nn)
	res := &NearestNeighbour{
		Points:       n,
		DensityPerHa: nf / a * SquareMetresPerHectare,
		Observed:     ra,
		Assumptions: []string{
			"Every animal (or capture location) in the region is mapped, or the mapped ones are a random subset.",
			"The reference pattern is a homogeneous Poisson scatter over the whole region; habitat the animals cannot use makes a pattern look clumped.",
			"The test is two-sided at the 5% level with a normal approximation.",
		},
		References: []string{
			"Clark, P.J. & Evans, F.C. (1954) Distance to nearest neighbor as a measure of spatial relationships in populations. Ecology 35:445-453.",
			"Donnelly, K.P. (1978) Simulations to determine the variance and edge effect of total nearest-neighbour distance. In Hodder, I. (ed.) Simulation Studies in Archaeology, pp. 91-95. Cambridge University Press.",
		},
	}
	if donnelly {
		res.Method = "Clark-Evans R with Donnelly edge correction"
		res.EdgeCorrection = EdgeDonnelly
		res.Expected = 0.5*math.Sqrt(a/nf) + (0.0514+0.041/math.Sqrt(nf))*p/nf
		res.SE = math.Sqrt(0.0703*a/(nf*nf) + 0.037*p*math.Sqrt(a/math.Pow(nf, 5)))
		if n < 7 {
			res.Warnings = append(res.Warnings, fmt.Sprintf("Donnelly's correction was fitted for 7 or more points; with %d the test is rough.", n))
		}
	} else {
		res.Method = "Clark-Evans R"
		res.EdgeCorrection = EdgeNone
		rho := nf / a
		res.Expected = 0.5 / math.Sqrt(rho)
		res.SE = math.Sqrt((4-math.Pi)/(4*math.Pi)) / math.Sqrt(nf*rho)
		res.Warnings = append(res.Warnings, "No edge correction: unless the points have neighbours mapped beyond the region's edge, R is biased upward (toward uniform).")
	}
	res.R = ra / res.Expected
	z := (ra - res.Expected) / res.SE
	pv := 2 * distuv.UnitNormal.Survival(math.Abs(z))
	res.Test = Test{Name: "z", Statistic: z, P: pv, Significant: pv < SignificanceLevel, Pattern: Random}
	if res.Test.Significant {
		if z < 0 {
			res.Test.Pattern = Clumped
		} else {
			res.Test.Pattern = Uniform
		}
	}
	if ra == 0 {
		res.Warnings = append(res.Warnings, "Every point shares its position with another: nearest-neighbour distances are all 0.")
	}
	return res, nil
}

// NearestNeighbourDistances returns, for each point, the distance (m) to
// the nearest other point, in input order. Points sharing a position have
// distance 0. It sorts by x and stops scanning once the x gap alone
// exceeds the best distance found, so clustered or gridded patterns of
// thousands of points stay fast. It needs at least two points; with fewer
// it returns nil.
func NearestNeighbourDistances(points []Point) []float64 {
	n := len(points)
	if n < 2 {
		return nil
	}
	idx := make([]int, n)
	for i := range idx {
		idx[i] = i
	}
	sort.Slice(idx, func(a, b int) bool { return points[idx[a]].X < points[idx[b]].X })
	out := make([]float64, n)
	for k, i := range idx {
		best := math.Inf(1)
		pi := points[i]
		for j := k + 1; j < n; j++ {
			q := points[idx[j]]
			if q.X-pi.X >= best {
				break
			}
			best = math.Min(best, Dist(pi, q))
		}
		for j := k - 1; j >= 0; j-- {
			q := points[idx[j]]
			if pi.X-q.X >= best {
				break
			}
			best = math.Min(best, Dist(pi, q))
		}
		out[i] = best
	}
	return out
}
