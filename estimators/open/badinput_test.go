package open

import (
	"encoding/json"
	"errors"
	"strings"
	"testing"

	"tagtally/estimators"
)

// TestOpenBadInputTable runs every open-population entry point on the
// kinds of bad input the estimators must survive: too few occasions, no
// recaptures after an occasion, animals never released (all lost on
// capture), an occasion with no catch at all (zero-count cells) and no
// recaptures anywhere. Each outcome must be an error wrapping a package
// sentinel, or a result that encodes as JSON (no NaN or Inf hidden in it)
// and, where the case names a degenerate cell, says so in a note, warning
// or boundary flag. Nothing may panic.
func TestOpenBadInputTable(t *testing.T) {
	type want int
	const (
		errOnly    want = iota // must fail with the sentinel
		flagged                // result allowed, but must flag the problem
		errOrFlags             // either is acceptable
	)
	for _, c := range []struct {
		name string
		rows []string
		// JS moments (both forms), CJS phi(.)p(.), CJS phi(t)p(t), JS
		// likelihood, GOF.
		js, cjs, cjst, jsml, gof want
		sentinel                 error
		jsNote                   string // part of the note JollySeber must give
	}{
		{"two occasions", []string{"11", "10", "01", "11", "10"},
			errOnly, errOnly, errOnly, errOnly, errOnly, estimators.ErrTooFewOccasions, ""},
		{"no recaptures anywhere", []string{"1000", "0100", "0010", "0001", "1000"},
			errOnly, errOnly, errOnly, errOnly, errOrFlags, estimators.ErrNoRecaptures, ""},
		// Occasion 2's releases are never seen again: r2 = 0.
		{"no recaptures after occasion 2", []string{"1100", "1100", "0100", "1010", "1010", "1001", "0011", "0011", "0010", "1000"},
			flagged, errOrFlags, errOrFlags, errOrFlags, errOrFlags, nil, "occasion 2: no animal released here was caught again (r = 0)"},
		// Every animal caught on occasion 2 is lost on capture: R2 = 0.
		{"never released on occasion 2", []string{"1100x", "1100x", "0100x", "1011", "1010", "0011", "0011", "0010", "1001", "1000"},
			flagged, errOrFlags, errOrFlags, errOrFlags, errOrFlags, nil, "occasion 2: no animal was released here (all 3 caught were lost on capture, R = 0)"},
		// Nothing at all is caught on occasion 3 (a column and a row of
		// zero cells).
		{"empty occasion 3", []string{"1101", "1101", "1001", "0101", "1100", "0101", "1000", "0100", "0001"},
			flagged, errOrFlags, errOrFlags, errOrFlags, errOrFlags, nil, "occasion 3: p is 0 (no marked animal caught)"},
	} {
		t.Run(c.name, func(t *testing.T) {
			h := histories(t, c.rows...)
			check := func(what string, w want, res any, notes []string, boundary bool, err error) {
				t.Helper()
				if err != nil {
					t.Logf("%s: error %v", what, err)
					if !knownSentinel(err) {
						t.Errorf("%s: error wraps no sentinel: %v", what, err)
					}
					if c.sentinel != nil && !errors.Is(err, c.sentinel) {
						t.Errorf("%s: err = %v, want %v", what, err, c.sentinel)
					}
					if w == flagged {
						t.Errorf("%s: err = %v, want a flagged result", what, err)
					}
					return
				}
				if w == errOnly {
					t.Errorf("%s: no error", what)
					return
				}
				if _, jerr := json.Marshal(res); jerr != nil {
					t.Errorf("%s: result does not encode (NaN or Inf?): %v", what, jerr)
				}
				if w == flagged && len(notes) == 0 && !boundary {
					t.Errorf("%s: degenerate cell not flagged", what)
				}
				t.Logf("%s: %s", what, strings.Join(notes, " | "))
			}
			noteHas := func(what string, notes []string, want string) {
				t.Helper()
				if !strings.Contains(strings.Join(notes, " "), want) {
					t.Errorf("%s: no note saying %q: %v", what, want, notes)
				}
			}

			m, s, err := FromHistories(h)
			if err != nil {
				t.Fatalf("FromHistories: %v", err)
			}
			js, err := JollySeber(s)
			var jsNotes []string
			if err == nil {
				jsNotes = append(jsNotes, js.Warnings...)
				for _, o := range js.Occasions {
					jsNotes = append(jsNotes, o.Notes...)
				}
			}
			check("JollySeber", c.js, js, jsNotes, false, err)
			if c.jsNote != "" {
				noteHas("JollySeber", jsNotes, c.jsNote)
			}

			ju, err := JollySeberUnadjusted(s)
			var juNotes []string
			if err == nil {
				juNotes = append(juNotes, ju.Warnings...)
			}
			check("JollySeberUnadjusted", c.js, ju, juNotes, false, err)

			for _, cj := range []struct {
				spec ModelSpec
				w    want
			}{{ModelSpec{Constant, Constant}, c.cjs}, {ModelSpec{Time, Time}, c.cjst}} {
				r, err := CJS(m, cj.spec.Phi, cj.spec.P)
				var notes []string
				b := false
				if err == nil {
					notes, b = r.Warnings, r.Boundary
				}
				check(cj.spec.String(), cj.w, r, notes, b, err)
			}

			ml, err := JollySeberML(h, Constant, Constant)
			var notes []string
			b := false
			if err == nil {
				notes, b = ml.Result.Warnings, ml.Result.Boundary
			}
			check("JollySeberML", c.jsml, ml, notes, b, err)

			g, err := GoodnessOfFit(h)
			notes = nil
			if err == nil {
				notes = g.Warnings
			}
			check("GoodnessOfFit", c.gof, g, notes, false, err)
		})
	}
}

func knownSentinel(err error) bool {
	for _, s := range []error{estimators.ErrNoData, estimators.ErrNoRecaptures, estimators.ErrTooFewOccasions, estimators.ErrInvalidInput, estimators.ErrNotConverged, ErrTooFewReleases} {
		if errors.Is(err, s) {
			return true
		}
	}
	return false
}
