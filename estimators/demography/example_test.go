package demography_test

import (
	"fmt"

	"tagtally/estimators"
	"tagtally/estimators/demography"
)

func ExampleSexRatio() {
	// 31 males and 19 females among the animals marked on an invented
	// grid, 2 not sexed.
	r, err := demography.SexRatio(31, 19, 2)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("proportion male %.2f (exact 95%% CI %.3f to %.3f), test of 1:1 p = %.3f\n",
		r.ProportionMale.Estimate, r.ProportionMale.Low, r.ProportionMale.High, r.P)
	// The interval and p-value match scipy.stats.binomtest for 31 of 50
	// (testdata/binomial.csv).

	// Output:
	// proportion male 0.62 (exact 95% CI 0.472 to 0.753), test of 1:1 p = 0.119
}

func ExampleAgeStructure() {
	recs := []demography.AgeRecord{
		{Animal: "T-101", Occasion: 1, Class: "adult"},
		{Animal: "T-102", Occasion: 1, Class: "juvenile"},
		{Animal: "T-101", Occasion: 2, Class: "adult"},
		{Animal: "T-103", Occasion: 2, Class: "adult"},
		{Animal: "T-104", Occasion: 2, Class: "juvenile"},
		{Animal: "T-105", Occasion: 2, Class: "juvenile"},
	}
	r, err := demography.AgeStructure(recs, []string{"juvenile", "adult"})
	if err != nil {
		fmt.Println(err)
		return
	}
	for i, occ := range r.Occasions {
		fmt.Printf("occasion %d:", occ)
		for j, c := range r.Classes {
			fmt.Printf(" %s %d (%.2f)", c, r.Counts[i][j], r.Proportions[i][j].Estimate)
		}
		fmt.Println()
	}
	// Output:
	// occasion 1: juvenile 1 (0.50) adult 1 (0.50)
	// occasion 2: juvenile 2 (0.50) adult 2 (0.50)
}

func ExampleCaptureFrequencies() {
	h := &estimators.Histories{Caught: [][]bool{
		{true, false, true, false},
		{false, true, false, false},
		{true, true, true, false},
		{false, false, false, true},
	}}
	f, err := demography.CaptureFrequencies(h)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println("f_k for k = 1..4:", f.F, "animals", f.Animals, "captures", f.Captures)
	// Output:
	// f_k for k = 1..4: [2 1 1 0] animals 4 captures 7
}

func ExampleMassBySexAndAge() {
	s, err := demography.MassBySexAndAge([]demography.MassRecord{
		{Sex: "F", Age: "adult", Mass: 30}, {Sex: "F", Age: "adult", Mass: 34},
		{Sex: "M", Age: "adult", Mass: 36}, {Sex: "M", Age: "adult", Mass: 38},
		{Sex: "M", Age: "adult", Mass: 40},
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, g := range s.Groups {
		fmt.Printf("%s %s: n %d, mean %.1f g, SD %.2f g\n", g.Sex, g.Age, g.N, g.Mean, g.SD)
	}
	// Output:
	// F adult: n 2, mean 32.0 g, SD 2.83 g
	// M adult: n 3, mean 38.0 g, SD 2.00 g
	// F all: n 2, mean 32.0 g, SD 2.83 g
	// M all: n 3, mean 38.0 g, SD 2.00 g
	// all adult: n 5, mean 35.6 g, SD 3.85 g
	// all all: n 5, mean 35.6 g, SD 3.85 g
}
