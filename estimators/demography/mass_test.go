package demography

import (
	"encoding/csv"
	"errors"
	"math"
	"os"
	"strconv"
	"strings"
	"testing"

	"tagtally/estimators"
)

// TestMassAgainstPython compares n, mean and SD per sex × age with
// Python's statistics module (testdata/binomial.py, output committed in
// testdata/mass.csv), including a group with a large mean and small
// spread that a naive sum-of-squares formula gets wrong.
func TestMassAgainstPython(t *testing.T) {
	f, err := os.Open("testdata/mass.csv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	var recs []MassRecord
	type ref struct {
		n        int
		mean, sd float64
		hasSD    bool
	}
	want := map[[2]string]ref{}
	for _, r := range rows[1:] {
		sex, age := r[0], r[1]
		for _, s := range strings.Fields(r[2]) {
			m, _ := strconv.ParseFloat(s, 64)
			recs = append(recs, MassRecord{Sex: sex, Age: age, Mass: m})
		}
		n, _ := strconv.Atoi(r[3])
		mean, _ := strconv.ParseFloat(r[4], 64)
		var sd float64
		if r[5] != "" {
			sd, _ = strconv.ParseFloat(r[5], 64)
		}
		if sex == "" {
			sex = UnknownClass
		}
		want[[2]string{sex, age}] = ref{n, mean, sd, r[5] != ""}
	}
	s, err := MassBySexAndAge(recs)
	if err != nil {
		t.Fatal(err)
	}
	for k, w := range want {
		g, ok := s.Group(k[0], k[1])
		if !ok {
			t.Fatalf("no group %v", k)
		}
		if g.N != w.n || !near(g.Mean, w.mean, 1e-12*w.mean) || g.HasSD != w.hasSD || !near(g.SD, w.sd, 1e-9*math.Max(w.sd, 1e-3)) {
			t.Errorf("%v: n %d mean %.15g SD %.15g, Python n %d mean %.15g SD %.15g", k, g.N, g.Mean, g.SD, w.n, w.mean, w.sd)
		}
		if w.hasSD && !near(g.SE, w.sd/math.Sqrt(float64(w.n)), 1e-9) {
			t.Errorf("%v: SE %v", k, g.SE)
		}
	}
	// Margins, by hand tally of the file:
	// 6 F adults + 3 F juveniles = 9 females; 6+3+5+1+2+4 = 21 masses in
	// all, of which 6+5+2 = 13 adults.
	if g, _ := s.Group("F", AllGroups); g.N != 9 || g.Min != 14.2 || g.Max != 35.1 {
		t.Errorf("females: %+v", g)
	}
	if g, _ := s.Group(AllGroups, AllGroups); g.N != 21 {
		t.Errorf("grand total n = %d, want 21", g.N)
	}
	if g, _ := s.Group(AllGroups, "adult"); g.N != 13 {
		t.Errorf("adults n = %d, want 13", g.N)
	}
	if last := s.Groups[len(s.Groups)-1]; last.Sex != AllGroups || last.Age != AllGroups {
		t.Errorf("last row %+v, want the grand total", last)
	}
	if len(s.Warnings) != 1 { // the single juvenile male
		t.Errorf("warnings %v", s.Warnings)
	}
}

func TestMassErrors(t *testing.T) {
	if _, err := MassBySexAndAge(nil); !errors.Is(err, estimators.ErrNoData) {
		t.Errorf("no records: %v", err)
	}
	for _, m := range []float64{0, -3, math.NaN(), math.Inf(1)} {
		if _, err := MassBySexAndAge([]MassRecord{{"F", "adult", 20}, {"F", "adult", m}}); !errors.Is(err, estimators.ErrInvalidInput) {
			t.Errorf("mass %v: err = %v", m, err)
		}
	}
}
