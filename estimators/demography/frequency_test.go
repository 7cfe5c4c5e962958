package demography

import (
	"encoding/csv"
	"errors"
	"os"
	"strconv"
	"testing"

	"tagtally/estimators"
)

// TestCaptureFrequenciesCottontail rebuilds histories with the published
// frequencies of the cottontail enclosure study (Edwards & Eberhardt
// 1967, 18 occasions, 76 animals; from memory, cross-checked, see
// testdata/README.md)
// and checks f_k, the animal count and the capture total
// Σ k f_k = 43 + 32 + 24 + 24 + 12 + 7 = 142 (hand arithmetic).
func TestCaptureFrequenciesCottontail(t *testing.T) {
	f, err := os.Open("testdata/cottontail-frequencies.csv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	const occasions = 18
	want := make([]int, occasions)
	var h estimators.Histories
	for _, r := range rows[1:] {
		k, _ := strconv.Atoi(r[0])
		fk, _ := strconv.Atoi(r[1])
		want[k-1] = fk
		for a := 0; a < fk; a++ {
			row := make([]bool, occasions)
			for j := 0; j < k; j++ {
				row[(a+j)%occasions] = true // k distinct occasions, varying start
			}
			h.Caught = append(h.Caught, row)
		}
	}
	ft, err := CaptureFrequencies(&h)
	if err != nil {
		t.Fatal(err)
	}
	for k := range want {
		if ft.F[k] != want[k] {
			t.Errorf("f_%d = %d, want %d", k+1, ft.F[k], want[k])
		}
	}
	if ft.Animals != 76 || ft.Captures != 142 || ft.Occasions != 18 || !near(ft.MeanCaptures, 142.0/76, 1e-15) {
		t.Errorf("animals %d captures %d occasions %d mean %v", ft.Animals, ft.Captures, ft.Occasions, ft.MeanCaptures)
	}
}

func TestCaptureFrequenciesErrors(t *testing.T) {
	if _, err := CaptureFrequencies(&estimators.Histories{}); !errors.Is(err, estimators.ErrNoData) {
		t.Errorf("empty: %v", err)
	}
	if _, err := CaptureFrequencies(nil); !errors.Is(err, estimators.ErrNoData) {
		t.Errorf("nil: %v", err)
	}
	never := &estimators.Histories{Caught: [][]bool{{true, false}, {false, false}}}
	if _, err := CaptureFrequencies(never); err == nil {
		t.Error("an animal never caught must be refused")
	}
}
