package spatial

import (
	"errors"
	"math"
	"testing"

	"tagtally/estimators"
)

// grid returns an nx × ny grid of stations with the given spacing (m),
// the usual live-trapping layout.
func grid(nx, ny int, spacing float64) []Point {
	var pts []Point
	for i := 0; i < nx; i++ {
		for j := 0; j < ny; j++ {
			pts = append(pts, Point{float64(i) * spacing, float64(j) * spacing})
		}
	}
	return pts
}

func TestConvexHullAreaPerimeter(t *testing.T) {
	rot := func(pts []Point, deg float64) []Point {
		s, c := math.Sincos(deg * math.Pi / 180)
		out := make([]Point, len(pts))
		for i, p := range pts {
			out[i] = Point{c*p.X - s*p.Y, s*p.X + c*p.Y}
		}
		return out
	}
	tests := []struct {
		name       string
		pts        []Point
		vertices   int
		area, perm float64 // hand-computed
	}{
		// 10 × 10 grid at 15 m: hull is the 135 m square.
		{"10x10 grid", grid(10, 10, 15), 4, 135 * 135, 4 * 135},
		// The same grid turned 30°: hull area does not depend on the axes.
		{"rotated grid", rot(grid(10, 10, 15), 30), 4, 135 * 135, 4 * 135},
		// Right triangle with legs 30 and 40 m plus interior and edge points.
		{"triangle", []Point{{0, 0}, {40, 0}, {0, 30}, {10, 10}, {20, 0}, {20, 15}}, 3, 600, 120},
		// A line of 5 traps 20 m apart: no area, perimeter twice 80 m.
		{"trap line", []Point{{0, 0}, {20, 0}, {40, 0}, {60, 0}, {80, 0}}, 2, 0, 160},
		{"one station twice", []Point{{5, 5}, {5, 5}}, 1, 0, 0},
	}
	for _, tc := range tests {
		h := ConvexHull(tc.pts)
		if len(h) != tc.vertices {
			t.Errorf("%s: hull has %d vertices %v, want %d", tc.name, len(h), h, tc.vertices)
		}
		if a := PolygonArea(h); math.Abs(a-tc.area) > 1e-6*math.Max(1, tc.area) {
			t.Errorf("%s: area %v, want %v", tc.name, a, tc.area)
		}
		if p := PolygonPerimeter(h); math.Abs(p-tc.perm) > 1e-6*math.Max(1, tc.perm) {
			t.Errorf("%s: perimeter %v, want %v", tc.name, p, tc.perm)
		}
	}
}

func TestRegions(t *testing.T) {
	r, err := RectangleRegion(200, 50)
	if err != nil || r.Area != 10000 || r.Perimeter != 500 {
		t.Fatalf("rectangle: %+v, %v", r, err)
	}
	// L-shaped polygon: 20×10 plus 10×10 = 300 m², perimeter 80 m.
	p, err := PolygonRegion([]Point{{0, 0}, {20, 0}, {20, 10}, {10, 10}, {10, 20}, {0, 20}})
	if err != nil || p.Area != 300 || p.Perimeter != 80 {
		t.Fatalf("L polygon: %+v, %v", p, err)
	}
	for _, bad := range [][2]float64{{0, 10}, {-1, 5}, {math.NaN(), 3}, {math.Inf(1), 2}} {
		if _, err := RectangleRegion(bad[0], bad[1]); !errors.Is(err, estimators.ErrInvalidInput) {
			t.Errorf("RectangleRegion(%v) err = %v", bad, err)
		}
	}
	if _, err := PolygonRegion([]Point{{0, 0}, {1, 1}, {2, 2}}); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("collinear polygon err = %v", err)
	}
	if _, err := PolygonRegion([]Point{{0, 0}, {1, math.NaN()}, {2, 0}}); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("NaN polygon err = %v", err)
	}
}

func TestBufferedHullRegion(t *testing.T) {
	// 135 m square grid grown by 10 m: area 135² + 540·10 + 100π, perimeter
	// 540 + 20π (Steiner's formula; the rounded square by hand: four
	// 135 × 10 side strips and four quarter circles).
	r, err := BufferedHullRegion(grid(10, 10, 15), 10)
	if err != nil {
		t.Fatal(err)
	}
	if !near(r.Area, 135*135+4*135*10+math.Pi*100, 1e-9) || !near(r.Perimeter, 4*135+2*math.Pi*10, 1e-9) {
		t.Errorf("got %+v", r)
	}
	if r0, err := BufferedHullRegion(grid(3, 3, 10), 0); err != nil || r0.Area != 400 || r0.Perimeter != 80 {
		t.Errorf("no strip: %+v %v", r0, err)
	}
	if _, err := BufferedHullRegion([]Point{{1, 1}}, 0); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("one station, no strip: %v", err)
	}
	if _, err := BufferedHullRegion(nil, 5); !errors.Is(err, estimators.ErrNoData) {
		t.Errorf("no stations: %v", err)
	}
	if _, err := BufferedHullRegion(grid(2, 2, 5), -1); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("negative strip: %v", err)
	}
}
