package estimators

import "fmt"

// Histories is the individual × occasion capture matrix that the
// history-based estimators take. Row i is one animal (one tag chain),
// column j one sampling occasion in time order.
type Histories struct {
	// Caught[i][j] is true when animal i was caught (or resighted, where
	// the method allows) on occasion j. Every row has the same length.
	Caught [][]bool
	// Removed, when not nil, has one entry per animal: true when the animal
	// was lost on capture (died or removed) at its last capture, so it was
	// not released and cannot be caught again.
	Removed []bool
	// Covariates holds individual covariates by name, one value per animal
	// (e.g. "mass" in grams, "male" as 0/1). Optional.
	Covariates map[string][]float64
	// Groups, when not nil, assigns each animal to a named group (e.g. a
	// sex) for group models. Optional.
	Groups []string
}

// Animals returns the number of rows.
func (h *Histories) Animals() int { return len(h.Caught) }

// Occasions returns the number of columns (0 for an empty matrix).
func (h *Histories) Occasions() int {
	if len(h.Caught) == 0 {
		return 0
	}
	return len(h.Caught[0])
}

// Validate checks the shape: at least one animal, equal row lengths, every
// animal caught at least once, and optional slices of matching length.
func (h *Histories) Validate() error {
	if h == nil || len(h.Caught) == 0 {
		return fmt.Errorf("capture histories: %w: no animals", ErrNoData)
	}
	t := len(h.Caught[0])
	if t == 0 {
		return fmt.Errorf("capture histories: %w: no occasions", ErrNoData)
	}
	for i, row := range h.Caught {
		if len(row) != t {
			return fmt.Errorf("capture histories: %w: animal %d has %d occasions, animal 1 has %d", ErrInvalidInput, i+1, len(row), t)
		}
		seen := false
		for _, c := range row {
			seen = seen || c
		}
		if !seen {
			return fmt.Errorf("capture histories: %w: animal %d was never caught", ErrInvalidInput, i+1)
		}
	}
	if h.Removed != nil && len(h.Removed) != len(h.Caught) {
		return fmt.Errorf("capture histories: %w: %d loss-on-capture flags for %d animals", ErrInvalidInput, len(h.Removed), len(h.Caught))
	}
	for name, v := range h.Covariates {
		if len(v) != len(h.Caught) {
			return fmt.Errorf("capture histories: %w: covariate %q has %d values for %d animals", ErrInvalidInput, name, len(v), len(h.Caught))
		}
	}
	if h.Groups != nil && len(h.Groups) != len(h.Caught) {
		return fmt.Errorf("capture histories: %w: %d group labels for %d animals", ErrInvalidInput, len(h.Groups), len(h.Caught))
	}
	return nil
}

// ParseHistory turns a 0/1 string such as "0110" into a row.
func ParseHistory(s string) ([]bool, error) {
	row := make([]bool, len(s))
	for j, c := range s {
		switch c {
		case '0':
		case '1':
			row[j] = true
		default:
			return nil, fmt.Errorf("capture history %q: %w: character %d is %q, want 0 or 1", s, ErrInvalidInput, j+1, c)
		}
	}
	return row, nil
}
