package demography

import (
	"errors"
	"reflect"
	"testing"

	"tagtally/estimators"
)

func TestAgeStructureHand(t *testing.T) {
	recs := []AgeRecord{
		{"A1", 1, "adult"}, {"A2", 1, "juvenile"}, {"A3", 1, "adult"},
		{"A1", 1, "adult"}, // caught twice on occasion 1: counts once
		{"A1", 2, "adult"}, {"A4", 2, "juvenile"}, {"A2", 2, "subadult"},
		{"A5", 2, ""}, // no class recorded
		{"A6", 3, "adult"},
	}
	r, err := AgeStructure(recs, []string{"juvenile", "subadult", "adult"})
	if err != nil {
		t.Fatal(err)
	}
	// Hand tally.
	wantClasses := []string{"juvenile", "subadult", "adult", UnknownClass}
	wantCounts := [][]int{{1, 0, 2, 0}, {1, 1, 1, 1}, {0, 0, 1, 0}}
	if !reflect.DeepEqual(r.Classes, wantClasses) || !reflect.DeepEqual(r.Occasions, []int{1, 2, 3}) ||
		!reflect.DeepEqual(r.Counts, wantCounts) || !reflect.DeepEqual(r.Totals, []int{3, 4, 1}) {
		t.Fatalf("got classes %v occasions %v counts %v totals %v", r.Classes, r.Occasions, r.Counts, r.Totals)
	}
	// A2 was juvenile then subadult: it appears once in each overall class.
	if !reflect.DeepEqual(r.Overall, []int{2, 1, 3, 1}) {
		t.Errorf("overall %v", r.Overall)
	}
	// Occasion 1: 2 adults of 3 = 0.6667 with exact interval for 2/3.
	p := r.Proportions[0][2]
	iv, _ := ClopperPearson(2, 3, 0.95)
	if !near(p.Estimate, 2.0/3, 1e-15) || p.Interval != iv {
		t.Errorf("adult proportion on occasion 1: %+v", p)
	}
	for i := range r.Proportions {
		sum := 0.0
		for _, v := range r.Proportions[i] {
			sum += v.Estimate
		}
		if !near(sum, 1, 1e-12) {
			t.Errorf("occasion %d proportions sum to %v", r.Occasions[i], sum)
		}
	}
	if len(r.Warnings) != 1 {
		t.Errorf("warnings %v", r.Warnings)
	}
}

func TestAgeStructureErrors(t *testing.T) {
	if _, err := AgeStructure(nil, nil); !errors.Is(err, estimators.ErrNoData) {
		t.Errorf("no records: %v", err)
	}
	conflict := []AgeRecord{{"A1", 1, "adult"}, {"A1", 1, "juvenile"}}
	if _, err := AgeStructure(conflict, nil); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("conflicting classes: %v", err)
	}
	if _, err := AgeStructure([]AgeRecord{{"", 1, "adult"}}, nil); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("no animal: %v", err)
	}
	if _, err := AgeStructure([]AgeRecord{{"A", 1, "adult"}}, []string{"adult", "adult"}); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("duplicate class: %v", err)
	}
	// Classes not listed are appended alphabetically.
	r, err := AgeStructure([]AgeRecord{{"A", 1, "b"}, {"B", 1, "a"}, {"C", 1, "z"}}, []string{"z"})
	if err != nil || !reflect.DeepEqual(r.Classes, []string{"z", "a", "b"}) {
		t.Errorf("classes %v, err %v", r.Classes, err)
	}
}
