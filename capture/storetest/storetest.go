// Package storetest opens throw-away capture stores for tests and checks
// them when the test ends: bbolt's own consistency check (Tx.Check) and the
// store's invariant between capture records and the tag index. A test that
// leaves the file inconsistent fails, whatever it asserted itself.
package storetest

import (
	"path/filepath"
	"testing"
	"time"

	"tagtally/capture"
)

// Open opens a new store in t.TempDir(). At cleanup it runs Store.Check and
// closes the store, failing the test on any problem.
func Open(t testing.TB) *capture.Store {
	t.Helper()
	s, err := capture.Open(filepath.Join(t.TempDir(), "tagtally.db"), capture.DefaultOptions)
	if err != nil {
		t.Fatalf("storetest: %v", err)
	}
	t.Cleanup(func() {
		if err := s.Check(); err != nil {
			t.Errorf("storetest: consistency check at cleanup: %v", err)
		}
		if err := s.Close(); err != nil {
			t.Errorf("storetest: close: %v", err)
		}
	})
	return s
}

// Study returns a valid invented study for tests: an open-design
// live-trapping grid of 4 stations with 5 daily occasions starting
// 2025-06-02 18:00 UTC (each window 18:00 to 08:00 next morning), tag
// series "ear tag" BF-0000 style, target species "bank vole". Each call
// returns a fresh copy that the caller may change.
func Study() *capture.Study {
	start := time.Date(2025, 6, 2, 18, 0, 0, 0, time.UTC)
	st := &capture.Study{
		ID:            "fen-grid-2025",
		Name:          "Fenmoor small-mammal grid 2025",
		TargetSpecies: []string{"bank vole"},
		Design:        capture.DesignOpen,
		AreaHectares:  0.81,
		TagSeries:     []capture.TagSeries{{Name: "ear tag", Pattern: `BF-[0-9]{4}`}},
		MassRanges:    []capture.MassRange{{Species: "bank vole", MinG: 10, MaxG: 45}},
		Cautions:      "Handle animals only under the study's permits and animal-welfare approval, after handling training; follow local rules.",
		CreatedBy:     "test crew",
		CreatedAt:     start.Add(-24 * time.Hour),
	}
	for i := 0; i < 5; i++ {
		s := start.Add(time.Duration(i) * 24 * time.Hour)
		st.Occasions = append(st.Occasions, capture.Occasion{Index: i + 1, Start: s, End: s.Add(14 * time.Hour)})
	}
	for i, id := range []string{"A1", "A2", "B1", "B2"} {
		x, y := float64(i%2)*15, float64(i/2)*15
		st.Stations = append(st.Stations, capture.Station{ID: id, Label: "trap " + id, Kind: capture.StationTrap, GridX: &x, GridY: &y})
	}
	return st
}
