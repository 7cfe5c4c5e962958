package spatial_test

import (
	"fmt"

	"tagtally/estimators"
	"tagtally/estimators/spatial"
)

// A 7 × 7 grid of traps 10 m apart on an invented study site, with the
// capture positions of the animals caught more than once.
func ExampleDensity() {
	var stations []spatial.Point
	for i := 0; i < 7; i++ {
		for j := 0; j < 7; j++ {
			stations = append(stations, spatial.Point{X: float64(i) * 10, Y: float64(j) * 10})
		}
	}
	animals := [][]spatial.Point{
		{{X: 0, Y: 0}, {X: 10, Y: 0}},
		{{X: 20, Y: 20}, {X: 20, Y: 40}, {X: 30, Y: 30}},
		{{X: 50, Y: 10}, {X: 50, Y: 20}},
		{{X: 60, Y: 60}, {X: 40, Y: 60}},
		{{X: 30, Y: 0}},
	}
	r, err := spatial.Density(spatial.DensityInput{
		Stations: stations,
		Animals:  animals,
		N:        estimators.Value{Estimate: 24, SE: 3},
		Strip:    spatial.HalfMMDM,
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("grid %.2f ha, MMDM %.1f m, strip %.1f m\n", r.GridAreaHa, r.MMDM.Estimate, r.StripWidth.Estimate)
	fmt.Printf("effective area %.3f ha\n", r.EffectiveAreaHa.Estimate)
	fmt.Printf("density %.1f per ha (SE %.1f, 95%% CI %.1f to %.1f)\n",
		r.Density.Estimate, r.Density.SE, r.Density.Low, r.Density.High)
	// Checked by hand: MMDM = (10+20+10+20)/4; A(W) = 3600 + 240·7.5 +
	// π·7.5² m²; CV² = (3/24)² + (287.12² · 8.333/4)/5576.7².

	// Output:
	// grid 0.36 ha, MMDM 15.0 m, strip 7.5 m
	// effective area 0.558 ha
	// density 43.0 per ha (SE 6.3, 95% CI 32.4 to 57.1)
}

func ExampleDispersion() {
	// Animals caught per station on an invented eight-station line.
	r, err := spatial.Dispersion([]int{0, 7, 1, 0, 9, 0, 2, 1})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("variance/mean %.2f: %s (p = %.2g)\n", r.VarianceMean.Ratio, r.VarianceMean.Test.Pattern, r.VarianceMean.Test.P)
	fmt.Printf("Morisita %.2f, standardized %.2f: %s\n", r.Morisita.Index, r.Morisita.Standardized, r.Morisita.StandardizedPattern)
	// Checked by hand: Σx = 20, Σx² = 136, s² = (136-50)/7,
	// I_d = 8·116/380.

	// Output:
	// variance/mean 4.91: clumped (p = 2.9e-05)
	// Morisita 2.44, standardized 0.57: clumped
}

func ExampleClarkEvans() {
	// Sixteen nest positions on a 4 × 4 lattice, 25 m apart, in a 100 m
	// square: as even as a pattern gets.
	var nests []spatial.Point
	for i := 0; i < 4; i++ {
		for j := 0; j < 4; j++ {
			nests = append(nests, spatial.Point{X: 12.5 + 25*float64(i), Y: 12.5 + 25*float64(j)})
		}
	}
	region, _ := spatial.RectangleRegion(100, 100)
	r, err := spatial.ClarkEvans(nests, region, true)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("R = %.2f, z = %.2f: %s\n", r.R, r.Test.Statistic, r.Test.Pattern)
	// Checked by hand: r_A = 25 m, r_E = 12.5 + (0.0514 + 0.041/4)·400/16.

	// Output:
	// R = 1.78, z = 5.35: uniform
}
