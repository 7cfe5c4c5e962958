package spatial

import (
	"encoding/csv"
	"errors"
	"math"
	"math/rand/v2"
	"os"
	"strconv"
	"strings"
	"testing"

	"tagtally/estimators"
)

// carpenterBees is the worked example of carpenter bee larvae in 180
// soap-tree yucca inflorescence stalks: stalks with x = 0..10 larvae
// number 114, 25, 15, 10, 6, 5, 2, 1, 1, 0, 1 (Ludwig & Reynolds 1988,
// Statistical Ecology, ch. 4, from memory; reproduced with mean 0.95 and
// variance 2.897 in an FAO forestry statistics manual, document X6831E).
func carpenterBees() []int {
	freq := []int{114, 25, 15, 10, 6, 5, 2, 1, 1, 0, 1}
	var c []int
	for x, f := range freq {
		for i := 0; i < f; i++ {
			c = append(c, x)
		}
	}
	return c
}

func TestVarianceToMeanPublished(t *testing.T) {
	r, err := VarianceToMean(carpenterBees())
	if err != nil {
		t.Fatal(err)
	}
	// Published: 180 stalks, 171 larvae, mean 0.95, s² = 2.897 (see
	// carpenterBees); the variance is given to 3 decimals.
	if r.Stations != 180 || r.Total != 171 || !near(r.Mean, 0.95, 1e-12) || !near(r.Variance, 2.897, 5e-4) {
		t.Errorf("got n=%d total=%d mean=%v s²=%v", r.Stations, r.Total, r.Mean, r.Variance)
	}
	// ID = 179 · 2.897/0.95 = 545.9 on 179 df: far in the upper tail, so
	// clumped (hand arithmetic from the published mean and variance).
	if !near(r.Test.Statistic, 179*2.897/0.95, 0.1) || r.Test.DF != 179 || r.Test.Pattern != Clumped || !r.Test.Significant {
		t.Errorf("test = %+v", r.Test)
	}
}

// TestDispersionAgainstR compares every index with R's vegan package
// (dispindmorisita) and R's chi-square distribution, run by
// testdata/reference.R with output committed in
// testdata/reference_morisita.csv.
func TestDispersionAgainstR(t *testing.T) {
	f, err := os.Open("testdata/reference_morisita.csv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	col := map[string]int{}
	for i, h := range rows[0] {
		col[h] = i
	}
	for _, row := range rows[1:] {
		name := row[col["name"]]
		num := func(h string) float64 {
			v, err := strconv.ParseFloat(row[col[h]], 64)
			if err != nil {
				t.Fatalf("%s %s: %v", name, h, err)
			}
			return v
		}
		var counts []int
		for _, s := range strings.Fields(row[col["counts"]]) {
			v, _ := strconv.Atoi(s)
			counts = append(counts, v)
		}
		r, err := Dispersion(counts)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		vm, mo := r.VarianceMean, r.Morisita
		checks := []struct {
			what      string
			got, want float64
		}{
			{"mean", vm.Mean, num("mean")},
			{"variance", vm.Variance, num("variance")},
			{"variance/mean", vm.Ratio, num("vmr")},
			{"index of dispersion", vm.Test.Statistic, num("chisq")},
			{"two-sided p", vm.Test.P, num("p_two_sided")},
			{"Morisita I_d", mo.Index, num("imor")},
			{"Morisita chi-square", mo.Test.Statistic, num("chisq")},
			{"clumped index", mo.ClumpedIndex, num("mclu")},
			{"uniform index", mo.UniformIndex, num("muni")},
			{"standardized I_p", mo.Standardized, num("imst")},
		}
		for _, c := range checks {
			tol := 1e-9 * math.Max(1, math.Abs(c.want))
			if c.what == "two-sided p" {
				tol = 1e-9 + 1e-6*c.want // R and gonum incomplete gamma differ in the last digits
			}
			if !near(c.got, c.want, tol) {
				t.Errorf("%s: %s = %.12g, R gives %.12g", name, c.what, c.got, c.want)
			}
		}
	}
}

func TestDispersionHandCases(t *testing.T) {
	// A perfectly even spread: 3 animals at each of 25 stations (a 5×5
	// grid). Variance 0, so VMR = 0 and ID = 0, the most uniform possible;
	// I_d = n(Σx²-Σx)/((Σx)²-Σx) = 25·(225-75)/(75²-75) = 0.6757
	// (hand arithmetic).
	even := make([]int, 25)
	for i := range even {
		even[i] = 3
	}
	r, err := Dispersion(even)
	if err != nil {
		t.Fatal(err)
	}
	if r.VarianceMean.Ratio != 0 || r.VarianceMean.Test.Statistic != 0 {
		t.Errorf("even: VMR %v, ID %v; want 0, 0", r.VarianceMean.Ratio, r.VarianceMean.Test.Statistic)
	}
	if r.VarianceMean.Test.Pattern != Uniform || r.Morisita.Test.Pattern != Uniform || r.Morisita.StandardizedPattern != Uniform {
		t.Errorf("even: readings %v %v %v, want uniform", r.VarianceMean.Test.Pattern, r.Morisita.Test.Pattern, r.Morisita.StandardizedPattern)
	}
	if !near(r.Morisita.Index, 25.0*150/(75*75-75), 1e-12) {
		t.Errorf("even: I_d = %v", r.Morisita.Index)
	}

	// Every animal at one of 12 stations: I_d = n = 12, the maximum, and
	// I_p = 1 (hand: the first branch gives 0.5 + 0.5·(n-M_c)/(n-M_c)).
	one := make([]int, 12)
	one[4] = 30
	r, err = Dispersion(one)
	if err != nil {
		t.Fatal(err)
	}
	if !near(r.Morisita.Index, 12, 1e-12) || !near(r.Morisita.Standardized, 1, 1e-12) {
		t.Errorf("one station: I_d %v, I_p %v; want 12, 1", r.Morisita.Index, r.Morisita.Standardized)
	}
	// VMR: mean 2.5, s² = (30-2.5)²+11·2.5² over 11 = 75, ratio 30 (hand).
	if !near(r.VarianceMean.Ratio, 30, 1e-12) || r.VarianceMean.Test.Pattern != Clumped || !r.Morisita.StandardizedSignificant {
		t.Errorf("one station: VMR %v, reading %v", r.VarianceMean.Ratio, r.VarianceMean.Test.Pattern)
	}

	// Counts 1, 0, 1, 0: Σx² = Σx, so I_d = 0 exactly; too few animals
	// for a significant reading.
	r, err = Dispersion([]int{1, 0, 1, 0})
	if err != nil {
		t.Fatal(err)
	}
	if r.Morisita.Index != 0 || r.VarianceMean.Test.Significant {
		t.Errorf("1,0,1,0: I_d %v, test %+v", r.Morisita.Index, r.VarianceMean.Test)
	}
}

// TestMorisitaChiSquareEqualsIndexOfDispersion checks the identity
// I_d(Σx-1) + n - Σx = (n-1)s²/mean (Morisita 1962; Krebs 1999, ch. 6)
// on assorted counts.
func TestMorisitaChiSquareEqualsIndexOfDispersion(t *testing.T) {
	for _, c := range [][]int{{5, 0, 0, 2, 7, 1}, {1, 1, 2}, {0, 9, 0, 0, 0, 0, 0, 3}, carpenterBees()} {
		vm, _ := VarianceToMean(c)
		mo, _ := Morisita(c)
		if !near(vm.Test.Statistic, mo.Test.Statistic, 1e-9*vm.Test.Statistic) || !near(mo.F, mo.Test.Statistic/float64(len(c)-1), 1e-12) {
			t.Errorf("%v: ID %v, Morisita chi-square %v", c, vm.Test.Statistic, mo.Test.Statistic)
		}
	}
}

func TestDispersionErrors(t *testing.T) {
	tests := []struct {
		counts []int
		want   error
	}{
		{nil, estimators.ErrNoData},
		{[]int{4}, estimators.ErrNoData},
		{[]int{0, 0, 0}, estimators.ErrNoData},
		{[]int{1, 0, 0}, estimators.ErrNoData}, // Morisita needs 2 animals
		{[]int{2, -1, 3}, estimators.ErrInvalidInput},
	}
	for _, tc := range tests {
		if _, err := Dispersion(tc.counts); !errors.Is(err, tc.want) {
			t.Errorf("%v: err = %v, want %v", tc.counts, err, tc.want)
		}
	}
	// One animal is enough for the variance-to-mean ratio.
	if _, err := VarianceToMean([]int{1, 0, 0}); err != nil {
		t.Errorf("VMR with one animal: %v", err)
	}
}

// TestDispersionNeverNaN runs many small random count vectors (fixed
// seed), including sparse ones near the indices' degenerate corners, and
// checks that every reported number is finite and I_p stays in [-1, 1].
func TestDispersionNeverNaN(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 8))
	for i := 0; i < 5000; i++ {
		n := 2 + rng.IntN(12)
		c := make([]int, n)
		for j := range c {
			if rng.IntN(3) == 0 {
				c[j] = rng.IntN(1 + rng.IntN(20))
			}
		}
		r, err := Dispersion(c)
		if err != nil {
			if !errors.Is(err, estimators.ErrNoData) {
				t.Fatalf("%v: %v", c, err)
			}
			continue
		}
		m := r.Morisita
		for _, v := range []float64{r.VarianceMean.Ratio, r.VarianceMean.Test.P, m.Index, m.F, m.Test.P, m.UniformIndex, m.ClumpedIndex, m.Standardized} {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				t.Fatalf("%v: non-finite result %+v %+v", c, r.VarianceMean, m)
			}
		}
		if m.Standardized < -1 || m.Standardized > 1 {
			t.Fatalf("%v: I_p %v", c, m.Standardized)
		}
	}
}
