package analysis

import (
	"errors"
	"strings"
	"testing"

	"tagtally/capture"
	"tagtally/estimators"
)

func TestFromHistorySet(t *testing.T) {
	csv := "id,history,sex,mass,removed,wing\n" +
		"T1,110,f,20.5,0,61\n" +
		"T2,011,m,22,1,\n" +
		"T3,100,m,19,0,58\n"
	hs, err := capture.ReadHistoryCSV(strings.NewReader(csv))
	if err != nil {
		t.Fatal(err)
	}
	h, notes, err := FromHistorySet(hs)
	if err != nil {
		t.Fatal(err)
	}
	if h.Animals() != 3 || h.Occasions() != 3 {
		t.Fatalf("shape %dx%d", h.Animals(), h.Occasions())
	}
	if !h.Caught[1][2] || h.Caught[1][0] {
		t.Errorf("row 2 = %v", h.Caught[1])
	}
	if h.Removed == nil || !h.Removed[1] || h.Removed[0] {
		t.Errorf("removed = %v", h.Removed)
	}
	if got := h.Covariates["mass"]; len(got) != 3 || got[1] != 22 {
		t.Errorf("mass = %v", got)
	}
	if got := h.Covariates["male"]; len(got) != 3 || got[0] != 0 || got[1] != 1 {
		t.Errorf("male = %v", got)
	}
	if _, ok := h.Covariates["wing"]; ok || len(notes) != 1 || !strings.Contains(notes[0], "wing") {
		t.Errorf("incomplete covariate kept or not noted: %v", notes)
	}
	if _, _, err := FromHistorySet(&capture.HistorySet{}); !errors.Is(err, estimators.ErrNoData) {
		t.Errorf("empty: %v", err)
	}
}
