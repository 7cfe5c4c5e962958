package closed

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"

	"tagtally/estimators"
)

func TestTableInvented(t *testing.T) {
	h := readHistoryCSVForTest(t, "testdata/mth-invented.csv")
	rep, err := Table(h, TableOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if rep.Animals != 119 || rep.Occasions != 8 {
		t.Fatalf("animals %d occasions %d", rep.Animals, rep.Occasions)
	}
	seen := map[string]bool{}
	var wsum, nbar, wN float64
	for _, r := range rep.Rows {
		seen[r.ID] = true
		if r.Result == nil && r.Error == "" {
			t.Errorf("%s: neither result nor error", r.ID)
		}
		if r.Result != nil {
			checkN(t, r.Result, rep.Animals)
		}
		if r.Family == FamilyFull && r.Ranked {
			wsum += r.Weight
			nbar += r.Weight * r.Result.N.Estimate
			wN += r.Weight
		}
	}
	for _, id := range []string{"m0", "mt", "mb", "mh", "mth", "mtb", "huggins", "jackknife", "chao-mh", "chao-mt", "chao-mth", "schnabel", "schumacher-eschmeyer"} {
		if !seen[id] {
			t.Errorf("model %s missing from the table", id)
		}
	}
	if seen["chapman"] || seen["huggins-covariates"] {
		t.Errorf("models that do not apply were listed")
	}
	near(t, "sum of Akaike weights", wsum, 1, 1e-9)
	if rep.AveragedN == nil {
		t.Fatal("no averaged N")
	}
	// Model-averaged N recomputed from the rows (Burnham & Anderson 2002, eq. 4.1).
	near(t, "averaged N", rep.AveragedN.Estimate, nbar/wN, 1e-9)
	// Full-likelihood rows come first, best first.
	prev := math.Inf(-1)
	for _, r := range rep.Rows {
		if r.Family != FamilyFull || !r.Ranked {
			break
		}
		if r.Criterion < prev {
			t.Errorf("rows not sorted by criterion")
		}
		prev = r.Criterion
	}
}

func TestTableOneModelAndUnknown(t *testing.T) {
	h := readHistoryCSVForTest(t, "testdata/mth-invented.csv")
	rep, err := Table(h, TableOptions{Models: []string{"Chao-Mh"}})
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Rows) != 1 || rep.Rows[0].ID != "chao-mh" || rep.Rows[0].Result == nil {
		t.Fatalf("rows %+v", rep.Rows)
	}
	if _, err := Table(h, TableOptions{Models: []string{"nonesuch"}}); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("unknown model: %v", err)
	}
	// A model named explicitly that does not apply reports why.
	rep, err = Table(h, TableOptions{Models: []string{"chapman"}})
	if err != nil || len(rep.Rows) != 1 || !strings.Contains(rep.Rows[0].Error, "2 occasions") {
		t.Errorf("chapman on 8 occasions: %v %+v", err, rep.Rows)
	}
}

func TestTableFailuresStayInRows(t *testing.T) {
	// No recaptures: every model fails, the table does not.
	h := &estimators.Histories{Caught: [][]bool{{true, false, false}, {false, true, false}, {false, false, true}}}
	rep, err := Table(h, TableOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Rows) == 0 {
		t.Fatal("no rows")
	}
	for _, r := range rep.Rows {
		if r.Result != nil && !r.Result.Boundary {
			t.Errorf("%s gave an estimate without recaptures: %+v", r.ID, r.Result.N)
		}
		if r.Result == nil && r.Error == "" {
			t.Errorf("%s: no error text", r.ID)
		}
	}
	// Single occasion and empty data: errors, no panic.
	if _, err := Table(&estimators.Histories{}, TableOptions{}); !errors.Is(err, estimators.ErrNoData) {
		t.Errorf("empty: %v", err)
	}
	rep, err = Table(&estimators.Histories{Caught: [][]bool{{true}, {true}}}, TableOptions{})
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range rep.Rows {
		if r.Result != nil {
			t.Errorf("%s estimated N from one occasion", r.ID)
		}
	}
	// Every animal caught every time: boundary estimates equal to the
	// number caught, or errors; never NaN.
	all := &estimators.Histories{Caught: [][]bool{{true, true, true}, {true, true, true}, {true, true, true}}}
	rep, err = Table(all, TableOptions{})
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range rep.Rows {
		if r.Result != nil {
			checkN(t, r.Result, 3)
		}
	}
}

func TestTableCovariates(t *testing.T) {
	h := readHistoryCSVForTest(t, "testdata/mth-invented.csv")
	mass := make([]float64, h.Animals())
	for i := range mass {
		mass[i] = 20 + float64(i%7)
	}
	h.Covariates = map[string][]float64{"mass": mass}
	rep, err := Table(h, TableOptions{Models: []string{"huggins", "huggins-covariates"}})
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Rows) != 2 {
		t.Fatalf("rows %+v", rep.Rows)
	}
	for _, r := range rep.Rows {
		if r.Result == nil {
			t.Fatalf("%s: %s", r.ID, r.Error)
		}
		if !r.Ranked {
			t.Errorf("%s not ranked among the conditional models", r.ID)
		}
	}
	if rep.ConditionalAveragedN == nil || rep.AveragedN != nil {
		t.Errorf("averages: %+v %+v", rep.AveragedN, rep.ConditionalAveragedN)
	}
}

// BenchmarkTable is the whole model table (M0, Mt, Mb, Mh, Mth, Mtb,
// Huggins with and without the mass covariate, jackknife, Chao, Schnabel,
// Schumacher-Eschmeyer) on the ~10,000-animal, 15-occasion population of
// BenchmarkM0; report it as a ratio to BenchmarkM0 from the same run.
func BenchmarkTable(b *testing.B) {
	h := benchHistories()
	b.ReportMetric(float64(h.Animals()), "animals")
	b.ResetTimer()
	for b.Loop() {
		rep, err := Table(h, TableOptions{})
		if err != nil {
			b.Fatal(err)
		}
		for _, r := range rep.Rows {
			if r.Result == nil {
				b.Fatalf("%s: %s", r.ID, r.Error)
			}
		}
	}
}

// BenchmarkTableNoLikelihood is the part of the table without a
// likelihood (jackknife, Chao Mh/Mt/Mth, Schnabel, Schumacher-Eschmeyer).
func BenchmarkTableNoLikelihood(b *testing.B) {
	h := benchHistories()
	opts := TableOptions{Models: []string{"jackknife", "chao-mh", "chao-mt", "chao-mth", "schnabel", "schumacher-eschmeyer"}}
	b.ResetTimer()
	for b.Loop() {
		if _, err := Table(h, opts); err != nil {
			b.Fatal(err)
		}
	}
}

func ExampleTable() {
	// Five invented animals over four occasions.
	h := &estimators.Histories{Caught: [][]bool{
		{true, true, false, true},
		{true, false, false, false},
		{false, true, true, false},
		{false, false, true, true},
		{false, true, false, false},
	}}
	rep, err := Table(h, TableOptions{Models: []string{"chao-mh", "schnabel"}})
	if err != nil {
		panic(err)
	}
	for _, r := range rep.Rows {
		fmt.Printf("%s: N = %.2f\n", r.Name, r.Result.N.Estimate)
	}
	// Output:
	// Chao Mh: N = 6.00
	// Schnabel (Chapman +1): N = 5.00
}
