package spatial

import (
	"fmt"
	"math"

	"tagtally/estimators"
)

// Strip says how the boundary-strip width W is taken from the mean maximum
// distance moved (MMDM).
type Strip int

const (
	// HalfMMDM: W = MMDM/2, the strip of Wilson & Anderson (1985) after
	// Dice (1938), about the radius of a typical home range.
	HalfMMDM Strip = iota
	// FullMMDM: W = MMDM, which Wilson & Anderson (1985) and later
	// comparisons found less biased for small mammals on grids.
	FullMMDM
)

func (s Strip) String() string {
	switch s {
	case HalfMMDM:
		return "half MMDM"
	case FullMMDM:
		return "full MMDM"
	}
	return fmt.Sprintf("Strip(%d)", int(s))
}

func (s Strip) factor() (float64, error) {
	switch s {
	case HalfMMDM:
		return 0.5, nil
	case FullMMDM:
		return 1, nil
	}
	return 0, fmt.Errorf("unknown strip rule %d: %w", int(s), estimators.ErrInvalidInput)
}

// CILogNormalPositive names the interval used for density: the estimate
// multiplied and divided by C = exp(1.96·sqrt(ln(1 + CV²))), which stays
// positive and is skewed like the estimate.
const CILogNormalPositive = "log-normal (estimate ×/÷ C, C = exp(1.96·sqrt(ln(1+CV²))))"

// DensityInput is what Density needs.
type DensityInput struct {
	// Stations are the trap (or net, or point) positions in metres. Their
	// convex hull is the grid area; see Density for why the hull. For
	// stations known only by WGS84 position, ProjectStations gives the
	// metres and the LocalProjection to put the captures in the same
	// plane.
	Stations []Point
	// Animals holds, for each animal, the positions (metres) of its
	// captures in any order, one entry per capture. Only the spread of an
	// animal's captures matters.
	Animals [][]Point
	// N is the abundance estimate for the grid with its SE, from any
	// closed-population estimator.
	N estimators.Value
	// Strip chooses W = MMDM/2 or W = MMDM.
	Strip Strip
	// CountSameStation, when true, lets animals recaptured only at the
	// station where they were first caught enter the MMDM with a
	// distance of 0. By default (false) only animals caught at two or more
	// different stations count, as in Wilson & Anderson (1985).
	CountSameStation bool
}

// DensityResult is animals per hectare over the effective trapping area.
type DensityResult struct {
	Method string `json:"method"`
	// Strip is the rule used for W.
	Strip string `json:"strip"`
	// GridAreaHa is the area of the convex hull of the stations (ha);
	// GridPerimeter its perimeter (m).
	GridAreaHa    float64 `json:"grid_area_ha"`
	GridPerimeter float64 `json:"grid_perimeter_m"`
	// MovedAnimals is the number of animals whose maximum distances
	// entered the MMDM.
	MovedAnimals int `json:"moved_animals"`
	// MMDM is the mean maximum distance moved (m) with SE = s/sqrt(m).
	MMDM estimators.Value `json:"mmdm_m"`
	// StripWidth is W in metres with its SE.
	StripWidth estimators.Value `json:"strip_width_m"`
	// EffectiveAreaHa is A(W) = A + P·W + πW² in hectares with its SE.
	EffectiveAreaHa estimators.Value `json:"effective_area_ha"`
	// Density is N / A(W) in animals per hectare.
	Density     estimators.Value `json:"density_per_ha"`
	N           estimators.Value `json:"N"`
	Assumptions []string         `json:"assumptions"`
	Warnings    []string         `json:"warnings,omitempty"`
	References  []string         `json:"references"`
}

// MaxDistanceMoved returns, for each animal, the largest distance (m)
// between any two of its captures, and whether the animal counts toward
// the MMDM: caught at two or more different positions, or (with
// countSameStation) caught at least twice.
func MaxDistanceMoved(animals [][]Point, countSameStation bool) (dists []float64, err error) {
	for i, caps := range animals {
		if err := checkPoints(fmt.Sprintf("animal %d capture", i), caps); err != nil {
			return nil, err
		}
		if len(caps) < 2 {
			continue
		}
		maxd := 0.0
		for a := range caps {
			for b := a + 1; b < len(caps); b++ {
				maxd = math.Max(maxd, Dist(caps[a], caps[b]))
			}
		}
		if maxd > 0 || countSameStation {
			dists = append(dists, maxd)
		}
	}
	return dists, nil
}

// Density estimates animals per hectare as N over an effective trapping
// area, the grid plus a boundary strip of width W (Dice 1938; Wilson &
// Anderson 1985):
//
//	MMDM = mean of the per-animal maximum distances d_i over m animals,
//	       var(MMDM) = s_d² / m
//	W    = MMDM/2 (HalfMMDM) or MMDM (FullMMDM), var(W) = f² var(MMDM)
//	A(W) = A + P·W + π W²     (Steiner's formula for a convex area A with
//	                           perimeter P buffered by W: exact for a
//	                           convex grid, rounded corners included)
//	var(A) = (P + 2πW)² var(W)                       (delta method)
//	D    = N / A(W)
//	var(D) = D² [ var(N)/N² + var(A)/A(W)² ]        (delta method, N and
//	                                                 W independent)
//
// The grid area A is the convex hull of the stations, not their bounding
// rectangle: for the usual rectangular grid the two are the same, but the
// rectangle depends on how the axes happen to lie (a grid laid at 45° to
// north would double its area) and, for an irregular or L-shaped layout,
// counts ground no trap samples. The hull is the smallest convex area
// that contains every trap and its buffered area is what Steiner's formula
// gives exactly. Like Wilson & Anderson, the grid area runs to the outer
// traps; the strip accounts for the ground beyond them.
//
// The interval is log-normal (CILogNormalPositive). Degenerate cases: a
// line of stations has hull area 0 and perimeter twice its length, so the
// effective area is a stadium 2LW + πW²; a single station gives πW². With
// no animal caught at two stations the strip cannot be estimated and
// ErrNoRecaptures is returned; with one such animal SE(W) is 0 and a
// warning says var(W) was not estimated.
func Density(in DensityInput) (*DensityResult, error) {
	const prefix = "boundary-strip density"
	f, err := in.Strip.factor()
	if err != nil {
		return nil, fmt.Errorf("%s: %w", prefix, err)
	}
	if len(in.Stations) == 0 {
		return nil, fmt.Errorf("%s: %w: no stations", prefix, estimators.ErrNoData)
	}
	if err := checkPoints("station", in.Stations); err != nil {
		return nil, fmt.Errorf("%s: %w", prefix, err)
	}
	n, seN := in.N.Estimate, in.N.SE
	if !(n > 0) || math.IsInf(n, 0) || !(seN >= 0) || math.IsInf(seN, 0) {
		return nil, fmt.Errorf("%s: N = %v with SE %v: N must be positive and SE non-negative, both finite: %w",
			prefix, n, seN, estimators.ErrInvalidInput)
	}
	d, err := MaxDistanceMoved(in.Animals, in.CountSameStation)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", prefix, err)
	}
	m := len(d)
	if m == 0 || (m > 0 && meanOf(d) == 0) {
		return nil, fmt.Errorf("%s: %w: no animal was caught at two different stations, so the strip width cannot be estimated",
			prefix, estimators.ErrNoRecaptures)
	}
	res := &DensityResult{
		Method: "N over grid plus boundary strip (" + in.Strip.String() + ")",
		Strip:  in.Strip.String(),
		N:      in.N,
		Assumptions: []string{
			"The population is closed during trapping and N is an unbiased estimate for the animals exposed to the traps.",
			"Animals living within the strip width W of the outer traps are the ones exposed to trapping; W is taken from the mean maximum distance moved between captures.",
			"Distances between captures measure movement of resident animals, not dispersal.",
			"The estimate of N and the strip width are independent (the delta-method SE adds their relative variances).",
		},
		References: []string{
			"Dice, L.R. (1938) Some census methods for mammals. Journal of Wildlife Management 2:119-130.",
			"Wilson, K.R. & Anderson, D.R. (1985) Evaluation of two density estimators of small mammal population size. Journal of Mammalogy 66:13-21.",
		},
	}
	mmdm := meanOf(d)
	varMMDM := 0.0
	if m >= 2 {
		varMMDM = sampleVariance(d, mmdm) / float64(m)
	} else {
		res.Warnings = append(res.Warnings, "Only one animal was caught at two different stations: the strip width has no variance estimate and the SE of density counts only the SE of N.")
	}
	if m < 10 {
		res.Warnings = append(res.Warnings, fmt.Sprintf("Only %d animals entered the mean maximum distance moved; with few recaptures the strip is usually too narrow and density too high (Wilson & Anderson 1985).", m))
	}
	res.MovedAnimals = m
	seMMDM := math.Sqrt(varMMDM)
	res.MMDM = estimators.Value{Estimate: mmdm, SE: seMMDM, Interval: estimators.NormalInterval(mmdm, seMMDM)}
	w, varW := f*mmdm, f*f*varMMDM
	res.StripWidth = estimators.Value{Estimate: w, SE: math.Sqrt(varW), Interval: estimators.NormalInterval(w, math.Sqrt(varW))}

	hull := ConvexHull(in.Stations)
	a0, p0 := PolygonArea(hull), PolygonPerimeter(hull)
	res.GridAreaHa, res.GridPerimeter = a0/SquareMetresPerHectare, p0
	if len(hull) < 3 {
		res.Warnings = append(res.Warnings, "The stations lie on a line or at one point: the grid encloses no area and the effective area is the strip alone.")
	}
	area := a0 + p0*w + math.Pi*w*w
	varA := math.Pow(p0+2*math.Pi*w, 2) * varW
	aHa, seAHa := area/SquareMetresPerHectare, math.Sqrt(varA)/SquareMetresPerHectare
	res.EffectiveAreaHa = estimators.Value{Estimate: aHa, SE: seAHa, Interval: estimators.NormalInterval(aHa, seAHa)}

	dens := n / aHa
	cv2 := (seN*seN)/(n*n) + varA/(area*area)
	seD := dens * math.Sqrt(cv2)
	res.Density = estimators.Value{Estimate: dens, SE: seD, Interval: logNormalInterval(dens, cv2)}
	if a0 > 0 && area > 2*a0 {
		res.Warnings = append(res.Warnings, fmt.Sprintf("The boundary strip (%.2f ha) is larger than the grid itself (%.2f ha): density depends more on the strip width than on N; a larger grid or telemetry-based movement distances would help.",
			(area-a0)/SquareMetresPerHectare, res.GridAreaHa))
	}
	return res, nil
}

func logNormalInterval(est, cv2 float64) estimators.Interval {
	iv := estimators.Interval{Low: est, High: est, Level: estimators.DefaultLevel, Kind: CILogNormalPositive}
	if cv2 > 0 {
		c := math.Exp(estimators.Z95 * math.Sqrt(math.Log(1+cv2)))
		iv.Low, iv.High = est/c, est*c
	}
	return iv
}

func meanOf(x []float64) float64 {
	s := 0.0
	for _, v := range x {
		s += v
	}
	return s / float64(len(x))
}

func sampleVariance(x []float64, mean float64) float64 {
	if len(x) < 2 {
		return 0
	}
	s := 0.0
	for _, v := range x {
		s += (v - mean) * (v - mean)
	}
	return s / float64(len(x)-1)
}
