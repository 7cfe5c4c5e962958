package spatial

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"tagtally/estimators"
)

func near(a, b, tol float64) bool { return math.Abs(a-b) <= tol }

// handAnimals are captures on a 10 × 10 grid at 15 m spacing whose
// maximum distances are easy to work out by hand: 15, 30, 15·√2 and 45 m
// for the four animals caught at two or more stations; one animal caught
// twice at one station and one caught once do not count.
var handAnimals = [][]Point{
	{{0, 0}, {15, 0}, {0, 0}},
	{{30, 30}, {30, 60}},
	{{45, 45}, {60, 60}, {45, 60}},
	{{90, 90}, {90, 90}},
	{{120, 0}},
	{{0, 120}, {45, 120}},
}

func TestDensityHandComputed(t *testing.T) {
	// Expected values worked out by hand from the formulas on Density
	// (Wilson & Anderson 1985 strip; delta method), checked with a short
	// /usr/bin/python3 session using the statistics module:
	// MMDM = (15+30+21.2132+45)/4 = 27.80330 m, SE = sqrt(s²/4) = 6.50580;
	// grid 135 × 135 m = 1.8225 ha, perimeter 540 m; N = 40 (SE 5).
	tests := []struct {
		strip                   Strip
		w, seW                  float64
		areaHa, seAreaHa        float64
		dens, seDens, low, high float64
	}{
		{HalfMMDM, 13.90165043, 3.25290205, 2.63390225, 0.20406972, 15.18659244, 2.23340281, 11.40113712, 20.22891117},
		{FullMMDM, 27.80330086, 6.50580411, 3.56673075, 0.46496546, 11.21475176, 2.02547234, 7.89383356, 15.93277285},
	}
	for _, tc := range tests {
		r, err := Density(DensityInput{Stations: grid(10, 10, 15), Animals: handAnimals,
			N: estimators.Value{Estimate: 40, SE: 5}, Strip: tc.strip})
		if err != nil {
			t.Fatal(err)
		}
		checks := []struct {
			name      string
			got, want float64
		}{
			{"grid area", r.GridAreaHa, 1.8225},
			{"perimeter", r.GridPerimeter, 540},
			{"MMDM", r.MMDM.Estimate, 27.80330086},
			{"SE MMDM", r.MMDM.SE, 6.50580411},
			{"W", r.StripWidth.Estimate, tc.w},
			{"SE W", r.StripWidth.SE, tc.seW},
			{"area", r.EffectiveAreaHa.Estimate, tc.areaHa},
			{"SE area", r.EffectiveAreaHa.SE, tc.seAreaHa},
			{"density", r.Density.Estimate, tc.dens},
			{"SE density", r.Density.SE, tc.seDens},
			{"CI low", r.Density.Low, tc.low},
			{"CI high", r.Density.High, tc.high},
		}
		for _, c := range checks {
			if !near(c.got, c.want, 1e-6*math.Max(1, math.Abs(c.want))) {
				t.Errorf("%v: %s = %.8f, want %.8f", tc.strip, c.name, c.got, c.want)
			}
		}
		if r.MovedAnimals != 4 {
			t.Errorf("%v: moved animals %d, want 4", tc.strip, r.MovedAnimals)
		}
		if len(r.Assumptions) == 0 || len(r.References) == 0 {
			t.Errorf("%v: assumptions and references must be stated", tc.strip)
		}
	}
}

func TestDensityCountSameStation(t *testing.T) {
	// With same-station recaptures counted, animal 4 adds a 0 m distance:
	// MMDM = 111.2132/5 = 22.24264 m (hand arithmetic).
	r, err := Density(DensityInput{Stations: grid(10, 10, 15), Animals: handAnimals,
		N: estimators.Value{Estimate: 40, SE: 5}, Strip: FullMMDM, CountSameStation: true})
	if err != nil {
		t.Fatal(err)
	}
	if r.MovedAnimals != 5 || !near(r.MMDM.Estimate, 22.24264069, 1e-6) {
		t.Errorf("moved %d, MMDM %v; want 5 and 22.24264", r.MovedAnimals, r.MMDM.Estimate)
	}
}

// TestSteinerArea checks A + P·W + πW² for the buffered hull against a
// count of raster cells within W of the hull, an independent numerical
// method, for a convex and a concave station layout (the hull fills in
// the notch) and a trap line.
func TestSteinerArea(t *testing.T) {
	layouts := map[string][]Point{
		"square grid": grid(6, 6, 20),
		"L-shaped":    {{0, 0}, {100, 0}, {100, 40}, {40, 40}, {40, 100}, {0, 100}},
		"trap line":   {{0, 0}, {50, 0}, {100, 0}, {150, 0}},
	}
	const w = 25.0
	for name, st := range layouts {
		hull := ConvexHull(st)
		steiner := PolygonArea(hull) + PolygonPerimeter(hull)*w + math.Pi*w*w
		// Raster count at 0.5 m over the bounding box grown by W.
		const h = 0.5
		minX, minY, maxX, maxY := math.Inf(1), math.Inf(1), math.Inf(-1), math.Inf(-1)
		for _, p := range hull {
			minX, minY = math.Min(minX, p.X), math.Min(minY, p.Y)
			maxX, maxY = math.Max(maxX, p.X), math.Max(maxY, p.Y)
		}
		count := 0
		for x := minX - w + h/2; x < maxX+w; x += h {
			for y := minY - w + h/2; y < maxY+w; y += h {
				if distToConvex(Point{x, y}, hull) <= w {
					count++
				}
			}
		}
		raster := float64(count) * h * h
		if math.Abs(raster-steiner)/steiner > 0.002 {
			t.Errorf("%s: Steiner area %.1f m², raster count %.1f m²", name, steiner, raster)
		}
	}
}

// distToConvex is the distance from p to a convex polygon given
// counter-clockwise (0 inside); test-only.
func distToConvex(p Point, hull []Point) float64 {
	if len(hull) >= 3 {
		inside := true
		for i := range hull {
			if cross(hull[i], hull[(i+1)%len(hull)], p) < 0 {
				inside = false
				break
			}
		}
		if inside {
			return 0
		}
	}
	best := math.Inf(1)
	for i := range hull {
		a, b := hull[i], hull[(i+1)%len(hull)]
		dx, dy := b.X-a.X, b.Y-a.Y
		t := 0.0
		if l2 := dx*dx + dy*dy; l2 > 0 {
			t = math.Max(0, math.Min(1, ((p.X-a.X)*dx+(p.Y-a.Y)*dy)/l2))
		}
		best = math.Min(best, math.Hypot(p.X-a.X-t*dx, p.Y-a.Y-t*dy))
	}
	return best
}

// TestDensityDeltaMethodBySimulation draws N and the per-animal maximum
// distances from known distributions (fixed seed) and compares the spread
// of the resulting densities with the delta-method SE, an independent
// check of the variance formula when CVs are moderate.
func TestDensityDeltaMethodBySimulation(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 11))
	const nTrue, seN, dMean, dSD, m = 60.0, 6.0, 40.0, 15.0, 30
	st := grid(8, 8, 20)
	var dens []float64
	var seSum float64
	const reps = 2000
	for r := 0; r < reps; r++ {
		animals := make([][]Point, m)
		for i := range animals {
			d := math.Max(1, dMean+dSD*rng.NormFloat64())
			animals[i] = []Point{{0, 0}, {d, 0}}
		}
		res, err := Density(DensityInput{Stations: st, Animals: animals,
			N: estimators.Value{Estimate: nTrue + seN*rng.NormFloat64(), SE: seN}, Strip: HalfMMDM})
		if err != nil {
			t.Fatal(err)
		}
		dens = append(dens, res.Density.Estimate)
		seSum += res.Density.SE
	}
	mean := meanOf(dens)
	sd := math.Sqrt(sampleVariance(dens, mean))
	avgSE := seSum / reps
	if math.Abs(avgSE/sd-1) > 0.08 {
		t.Errorf("delta-method SE averages %.4f, simulated SD of density %.4f", avgSE, sd)
	}
}

func TestDensityErrors(t *testing.T) {
	good := DensityInput{Stations: grid(3, 3, 10), Animals: handAnimals, N: estimators.Value{Estimate: 10, SE: 1}}
	tests := []struct {
		name string
		mod  func(*DensityInput)
		want error
	}{
		{"no stations", func(in *DensityInput) { in.Stations = nil }, estimators.ErrNoData},
		{"NaN station", func(in *DensityInput) { in.Stations = []Point{{0, math.NaN()}} }, estimators.ErrInvalidInput},
		{"N zero", func(in *DensityInput) { in.N.Estimate = 0 }, estimators.ErrInvalidInput},
		{"SE negative", func(in *DensityInput) { in.N.SE = -1 }, estimators.ErrInvalidInput},
		{"N infinite", func(in *DensityInput) { in.N.Estimate = math.Inf(1) }, estimators.ErrInvalidInput},
		{"bad strip", func(in *DensityInput) { in.Strip = Strip(9) }, estimators.ErrInvalidInput},
		{"nobody moved", func(in *DensityInput) { in.Animals = [][]Point{{{0, 0}, {0, 0}}, {{10, 10}}} }, estimators.ErrNoRecaptures},
		{"nobody moved, zeros counted", func(in *DensityInput) {
			in.Animals = [][]Point{{{0, 0}, {0, 0}}}
			in.CountSameStation = true
		}, estimators.ErrNoRecaptures},
		{"NaN capture", func(in *DensityInput) { in.Animals = [][]Point{{{0, 0}, {math.Inf(1), 0}}} }, estimators.ErrInvalidInput},
	}
	for _, tc := range tests {
		in := good
		tc.mod(&in)
		if _, err := Density(in); !errors.Is(err, tc.want) {
			t.Errorf("%s: err = %v, want %v", tc.name, err, tc.want)
		}
	}
	if _, err := Density(good); err != nil {
		t.Fatalf("good input: %v", err)
	}
}

func TestDensityDegenerateLayouts(t *testing.T) {
	animals := [][]Point{{{0, 0}, {20, 0}}, {{20, 0}, {60, 0}}}
	// Trap line 0..80 m, W = MMDM/2 = 15 m: stadium 2·80·15 + π·15² m².
	r, err := Density(DensityInput{Stations: []Point{{0, 0}, {20, 0}, {40, 0}, {60, 0}, {80, 0}},
		Animals: animals, N: estimators.Value{Estimate: 12, SE: 2}})
	if err != nil {
		t.Fatal(err)
	}
	want := (2*80*15 + math.Pi*15*15) / 1e4
	if !near(r.EffectiveAreaHa.Estimate, want, 1e-12) || len(r.Warnings) == 0 {
		t.Errorf("trap line: area %v ha, want %v; warnings %v", r.EffectiveAreaHa.Estimate, want, r.Warnings)
	}
	// One moved animal: SE of W is 0 and a warning says so; density SE is
	// N's CV alone.
	r, err = Density(DensityInput{Stations: grid(4, 4, 10), Animals: animals[:1],
		N: estimators.Value{Estimate: 12, SE: 3}, Strip: FullMMDM})
	if err != nil {
		t.Fatal(err)
	}
	if r.StripWidth.SE != 0 || !near(r.Density.SE/r.Density.Estimate, 0.25, 1e-12) {
		t.Errorf("one mover: SE(W) %v, CV(D) %v", r.StripWidth.SE, r.Density.SE/r.Density.Estimate)
	}
}
