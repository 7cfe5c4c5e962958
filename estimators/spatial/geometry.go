package spatial

import (
	"fmt"
	"math"
	"sort"

	"tagtally/estimators"
)

// SquareMetresPerHectare converts areas in square metres to hectares.
const SquareMetresPerHectare = 10000.0

// Point is a location in metres on a local plane: X east, Y north.
type Point struct {
	X float64 `json:"x"`
	Y float64 `json:"y"`
}

// Dist is the Euclidean distance between two points in metres.
func Dist(a, b Point) float64 { return math.Hypot(a.X-b.X, a.Y-b.Y) }

func finitePoint(p Point) bool {
	return !math.IsNaN(p.X) && !math.IsNaN(p.Y) && !math.IsInf(p.X, 0) && !math.IsInf(p.Y, 0)
}

func checkPoints(what string, pts []Point) error {
	for i, p := range pts {
		if !finitePoint(p) {
			return fmt.Errorf("%s %d has a coordinate that is not a finite number (%v, %v): %w",
				what, i, p.X, p.Y, estimators.ErrInvalidInput)
		}
	}
	return nil
}

func cross(o, a, b Point) float64 {
	return (a.X-o.X)*(b.Y-o.Y) - (a.Y-o.Y)*(b.X-o.X)
}

// notLeftTurn reports whether o→a→b turns clockwise or goes straight,
// treating turns within rounding of straight (relative 1e-10) as straight
// so that a rotated grid's edge stations do not become hull vertices.
func notLeftTurn(o, a, b Point) bool {
	return cross(o, a, b) <= 1e-10*Dist(o, a)*Dist(o, b)
}

// ConvexHull returns the vertices of the convex hull of pts in
// counter-clockwise order, without repeating the first vertex (Andrew's
// monotone chain). Duplicate points are merged and collinear points on the
// hull's edges dropped. One distinct point gives one vertex, collinear
// points give the two ends of the segment. The input is not modified.
func ConvexHull(pts []Point) []Point {
	p := append([]Point(nil), pts...)
	sort.Slice(p, func(i, j int) bool {
		if p[i].X != p[j].X {
			return p[i].X < p[j].X
		}
		return p[i].Y < p[j].Y
	})
	// Merge exact duplicates.
	u := p[:0]
	for i, q := range p {
		if i == 0 || q != u[len(u)-1] {
			u = append(u, q)
		}
	}
	p = u
	if len(p) <= 2 {
		return append([]Point(nil), p...)
	}
	hull := make([]Point, 0, 2*len(p))
	for _, q := range p { // lower hull
		for len(hull) >= 2 && notLeftTurn(hull[len(hull)-2], hull[len(hull)-1], q) {
			hull = hull[:len(hull)-1]
		}
		hull = append(hull, q)
	}
	lower := len(hull) + 1
	for i := len(p) - 2; i >= 0; i-- { // upper hull
		q := p[i]
		for len(hull) >= lower && notLeftTurn(hull[len(hull)-2], hull[len(hull)-1], q) {
			hull = hull[:len(hull)-1]
		}
		hull = append(hull, q)
	}
	hull = hull[:len(hull)-1]
	if len(hull) == 2 && hull[0] == hull[1] {
		hull = hull[:1]
	}
	return hull
}

// PolygonArea is the area enclosed by a simple polygon given by its
// vertices in order (either direction), by the shoelace formula. Fewer
// than three vertices enclose no area.
func PolygonArea(v []Point) float64 {
	if len(v) < 3 {
		return 0
	}
	s := 0.0
	for i := range v {
		j := (i + 1) % len(v)
		s += v[i].X*v[j].Y - v[j].X*v[i].Y
	}
	return math.Abs(s) / 2
}

// PolygonPerimeter is the length of the closed boundary through the
// vertices in order. For two vertices it is twice the segment's length,
// the perimeter of a degenerate polygon (a line of traps), which is what
// Steiner's formula for a buffered segment needs.
func PolygonPerimeter(v []Point) float64 {
	if len(v) < 2 {
		return 0
	}
	s := 0.0
	for i := range v {
		s += Dist(v[i], v[(i+1)%len(v)])
	}
	return s
}

// Region is the study area a point pattern lies in, described by what the
// nearest-neighbour statistics need: its area (m²) and perimeter (m).
type Region struct {
	Area      float64 `json:"area_m2"`
	Perimeter float64 `json:"perimeter_m"`
}

// RectangleRegion is a width × height rectangle in metres.
func RectangleRegion(width, height float64) (Region, error) {
	if !(width > 0) || !(height > 0) || math.IsInf(width, 0) || math.IsInf(height, 0) {
		return Region{}, fmt.Errorf("rectangle region: width %v and height %v must be positive finite metres: %w",
			width, height, estimators.ErrInvalidInput)
	}
	return Region{Area: width * height, Perimeter: 2 * (width + height)}, nil
}

// PolygonRegion is the region inside a simple polygon (vertices in order,
// metres). It does not check that the edges do not cross.
func PolygonRegion(vertices []Point) (Region, error) {
	if err := checkPoints("polygon vertex", vertices); err != nil {
		return Region{}, fmt.Errorf("polygon region: %w", err)
	}
	a := PolygonArea(vertices)
	if len(vertices) < 3 || !(a > 0) {
		return Region{}, fmt.Errorf("polygon region: %d vertices enclose no area: %w",
			len(vertices), estimators.ErrInvalidInput)
	}
	return Region{Area: a, Perimeter: PolygonPerimeter(vertices)}, nil
}

// BufferedHullRegion is the convex hull of the stations grown by a strip
// of width w metres (w ≥ 0): by Steiner's formula its area is
// A + P·w + πw² and its perimeter P + 2πw, where A and P are the hull's.
// It is the effective trapping area of Density as a Region, for testing
// the pattern of capture locations over the ground the traps sample.
func BufferedHullRegion(stations []Point, w float64) (Region, error) {
	if err := checkPoints("station", stations); err != nil {
		return Region{}, fmt.Errorf("buffered hull region: %w", err)
	}
	if len(stations) == 0 {
		return Region{}, fmt.Errorf("buffered hull region: %w: no stations", estimators.ErrNoData)
	}
	if !(w >= 0) || math.IsInf(w, 0) {
		return Region{}, fmt.Errorf("buffered hull region: strip width %v m must be a finite number ≥ 0: %w", w, estimators.ErrInvalidInput)
	}
	h := ConvexHull(stations)
	a, p := PolygonArea(h), PolygonPerimeter(h)
	r := Region{Area: a + p*w + math.Pi*w*w, Perimeter: p + 2*math.Pi*w}
	if !(r.Area > 0) {
		return Region{}, fmt.Errorf("buffered hull region: the stations enclose no area and the strip is 0 m: %w", estimators.ErrInvalidInput)
	}
	return r, nil
}
