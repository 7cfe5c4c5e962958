package demo

import (
	"errors"
	"fmt"

	"tagtally/capture"
)

// ErrLoad is wrapped by Load's errors.
var ErrLoad = errors.New("demo: load")

// Load writes the demo study and its records into s and returns how many
// records it added. It is idempotent: it creates the study only if it is
// missing and adds only the records whose IDs are not stored yet, so a
// second run adds nothing and a run after a partial load completes it. It
// never overwrites a study or record that is already there (a coordinator
// may have edited or deleted demo records while trying the program out).
func Load(s *capture.Store) (int, error) {
	st, caps := Build()
	if _, err := s.GetStudy(st.ID); errors.Is(err, capture.ErrNotFound) {
		if err := s.CreateStudy(st); err != nil && !errors.Is(err, capture.ErrConflict) {
			return 0, fmt.Errorf("%w: %w", ErrLoad, err)
		}
	} else if err != nil {
		return 0, fmt.Errorf("%w: %w", ErrLoad, err)
	}
	var missing []capture.Capture
	err := s.View(func(tx *capture.Tx) error {
		for _, c := range caps {
			_, err := tx.GetCapture(c.StudyID, c.ID)
			switch {
			case errors.Is(err, capture.ErrNotFound):
				missing = append(missing, c)
			case err != nil:
				return err
			}
		}
		return nil
	})
	if err != nil {
		return 0, fmt.Errorf("%w: %w", ErrLoad, err)
	}
	if len(missing) == 0 {
		return 0, nil
	}
	if _, err := s.PutCaptures(missing); err != nil {
		return 0, fmt.Errorf("%w: %w", ErrLoad, err)
	}
	return len(missing), nil
}
