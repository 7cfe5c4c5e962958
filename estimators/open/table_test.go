package open

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"tagtally/estimators"
)

func TestCJSTableDipper(t *testing.T) {
	tab, err := CJSTable([]MArray{dipper(t)}, nil, nil, 1)
	if err != nil {
		t.Fatal(err)
	}
	if len(tab.Rows) != 4 || len(tab.Failed) != 0 {
		t.Fatalf("%d rows, failed %v", len(tab.Rows), tab.Failed)
	}
	// Order by AICc, each worked by hand from the scipy log-likelihoods of
	// testdata/cjs_reference.json: -2lnL + 2K + 2K(K+1)/(426-K-1).
	want := []struct {
		name string
		aicc float64
	}{
		{"CJS phi(.) p(.)", 666.83766 + 4 + 12.0/423},
		{"CJS phi(t) p(.)", 659.73009 + 14 + 112.0/418},
		{"CJS phi(.) p(t)", 664.48017 + 14 + 112.0/418},
		{"CJS phi(t) p(t)", 656.95021 + 22 + 264.0/414},
	}
	wsum := 0.0
	for k, w := range want {
		row := tab.Rows[k]
		if row.Result.Method != w.name || math.Abs(row.Criterion-w.aicc) > 1e-3 {
			t.Errorf("row %d: %s %.4f, want %s %.4f", k, row.Result.Method, row.Criterion, w.name, w.aicc)
		}
		wsum += row.Weight
	}
	if math.Abs(wsum-1) > 1e-12 {
		t.Errorf("weights sum to %v", wsum)
	}
	// phi[2] averaged over all four models, recomputed here from the rows.
	var mean float64
	for _, row := range tab.Rows {
		p, _ := lookup(row.Result, "phi", "", 2)
		mean += row.Weight * p.Estimate
	}
	got := averaged(t, tab, "phi[2]")
	if math.Abs(got.Estimate-mean) > 1e-12 || got.SE <= 0 || !got.Identifiable {
		t.Errorf("phi[2] averaged %+v, want %.6f", got, mean)
	}
	// phi[6] is not identifiable in phi(t) p(t): averaged over the other
	// three with renormalised weights, and the table says so.
	var num, den float64
	for _, row := range tab.Rows {
		if p, _ := lookup(row.Result, "phi", "", 6); p.Identifiable {
			num += row.Weight * p.Estimate
			den += row.Weight
		}
	}
	if got := averaged(t, tab, "phi[6]"); math.Abs(got.Estimate-num/den) > 1e-12 {
		t.Errorf("phi[6] averaged %.6f, want %.6f", got.Estimate, num/den)
	}
	if len(tab.Warnings) == 0 || !strings.Contains(strings.Join(tab.Warnings, " "), "phi[6]") {
		t.Errorf("no warning about phi[6]: %v", tab.Warnings)
	}
}

func averaged(t *testing.T, tab *ModelTable, name string) estimators.Named {
	t.Helper()
	for _, a := range tab.Averaged {
		if a.Name == name {
			return a
		}
	}
	t.Fatalf("no averaged %s", name)
	return estimators.Named{}
}

func TestCJSTableOverdispersion(t *testing.T) {
	plain, err := CJSTable([]MArray{dipper(t)}, nil, []ModelSpec{{Constant, Constant}}, 1)
	if err != nil {
		t.Fatal(err)
	}
	over, err := CJSTable([]MArray{dipper(t)}, nil, []ModelSpec{{Constant, Constant}}, 2.25)
	if err != nil {
		t.Fatal(err)
	}
	if over.CriterionName != "QAICc" {
		t.Errorf("criterion %s", over.CriterionName)
	}
	a, b := param(t, plain.Rows[0].Result, "phi"), param(t, over.Rows[0].Result, "phi")
	if math.Abs(b.SE-1.5*a.SE) > 1e-12 || b.High-b.Low <= a.High-a.Low {
		t.Errorf("SE %.5f -> %.5f, want ×1.5", a.SE, b.SE)
	}
	if _, err := CJSTable([]MArray{dipper(t)}, nil, nil, math.NaN()); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("NaN c-hat: err = %v", err)
	}
}

func TestCJSTableGroups(t *testing.T) {
	names, ms := readMArrayCSV(t, "testdata/groups-marray.csv")
	tab, err := CJSTable(ms, names, nil, 0)
	if err != nil {
		t.Fatal(err)
	}
	if len(tab.Rows) != len(StandardModels(2)) || len(tab.Failed) != 0 {
		t.Fatalf("%d rows, failed %v", len(tab.Rows), tab.Failed)
	}
	// The simulated truth (testdata/README.md): females phi 0.70, males
	// 0.55. The averaged values of a study this size fall within 0.12.
	for _, c := range []struct {
		name string
		want float64
	}{
		{"phi(female)[2]", 0.70}, {"phi(male)[2]", 0.55}, {"p(female)[3]", 0.60}, {"p(male)[3]", 0.45},
	} {
		if got := averaged(t, tab, c.name); math.Abs(got.Estimate-c.want) > 0.12 {
			t.Errorf("%s = %.3f, truth %.2f", c.name, got.Estimate, c.want)
		}
	}
	// Group models must beat the models that ignore groups.
	if best := tab.Rows[0].Result.Method; !strings.Contains(best, "(g") {
		t.Errorf("best model %s ignores the groups", best)
	}
}

func TestCJSTableBadInput(t *testing.T) {
	if _, err := CJSTable(nil, nil, nil, 0); !errors.Is(err, estimators.ErrNoData) {
		t.Errorf("nil: err = %v", err)
	}
	zero := MArray{Released: []int{5, 5, 0}, M: [][]int{{0, 0, 0}, {0, 0, 0}, {0, 0, 0}}}
	if _, err := CJSTable([]MArray{zero}, nil, nil, 0); !errors.Is(err, estimators.ErrNoRecaptures) {
		t.Errorf("no recaptures: err = %v", err)
	}
}

// ExampleCJS fits constant survival and capture probability to the
// European dipper m-array (Lebreton et al. 1992).
func ExampleCJS() {
	m := MArray{
		Released: []int{22, 60, 78, 80, 88, 98, 0},
		M: [][]int{
			{0, 11, 2, 0, 0, 0, 0},
			{0, 0, 24, 1, 0, 0, 0},
			{0, 0, 0, 34, 2, 0, 0},
			{0, 0, 0, 0, 45, 1, 2},
			{0, 0, 0, 0, 0, 51, 0},
			{0, 0, 0, 0, 0, 0, 52},
			{0, 0, 0, 0, 0, 0, 0},
		},
	}
	r, err := CJS(m, Constant, Constant)
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, name := range []string{"phi", "p"} {
		p, _ := r.Param(name)
		fmt.Printf("%s = %.3f (SE %.3f, 95%% CI %.3f-%.3f)\n", name, p.Estimate, p.SE, p.Low, p.High)
	}
	fmt.Printf("K = %d, AICc = %.2f\n", r.Params, r.AICc)
	// Output:
	// phi = 0.560 (SE 0.025, 95% CI 0.511-0.609)
	// p = 0.903 (SE 0.029, 95% CI 0.830-0.946)
	// K = 2, AICc = 670.87
}

// TestRandomSmallStudies runs the estimators on many small random data
// sets (fixed seed): every outcome is either a result that encodes as JSON
// (so no NaN or Inf hides in it) or an error wrapping one of the package
// sentinels; nothing panics.
func TestRandomSmallStudies(t *testing.T) {
	rng := rand.New(rand.NewPCG(99, 1))
	sentinels := []error{estimators.ErrNoData, estimators.ErrNoRecaptures, estimators.ErrTooFewOccasions, estimators.ErrInvalidInput, estimators.ErrNotConverged, ErrTooFewReleases}
	known := func(err error) bool {
		for _, s := range sentinels {
			if errors.Is(err, s) {
				return true
			}
		}
		return false
	}
	for k := 0; k < 300; k++ {
		occ := 2 + rng.IntN(5)
		h := &estimators.Histories{}
		for a, n := 0, 1+rng.IntN(15); a < n; a++ {
			row := make([]bool, occ)
			row[rng.IntN(occ)] = true
			for j := range row {
				row[j] = row[j] || rng.Float64() < 0.3
			}
			h.Caught = append(h.Caught, row)
			h.Removed = append(h.Removed, rng.Float64() < 0.1)
			h.Groups = append(h.Groups, []string{"a", "b"}[rng.IntN(2)])
		}
		m, s, err := FromHistories(h)
		if err != nil {
			t.Fatalf("set %d: %v", k, err)
		}
		if js, err := JollySeber(s); err != nil {
			if !known(err) {
				t.Errorf("set %d: Jolly-Seber error %v", k, err)
			}
		} else if _, err := json.Marshal(js); err != nil {
			t.Errorf("set %d: Jolly-Seber result does not encode: %v", k, err)
		}
		if tab, err := CJSTable([]MArray{m}, nil, nil, 0); err != nil {
			if !known(err) {
				t.Errorf("set %d: CJS error %v", k, err)
			}
		} else if _, err := json.Marshal(tab); err != nil {
			t.Errorf("set %d: CJS table does not encode: %v", k, err)
		}
		names, ms, err := GroupMArrays(h)
		if err != nil {
			t.Fatal(err)
		}
		if len(ms) > 1 {
			if tab, err := CJSTable(ms, names, nil, 0); err != nil {
				if !known(err) {
					t.Errorf("set %d: CJS groups error %v", k, err)
				}
			} else if _, err := json.Marshal(tab); err != nil {
				t.Errorf("set %d: CJS group table does not encode: %v", k, err)
			}
		}
	}
}
