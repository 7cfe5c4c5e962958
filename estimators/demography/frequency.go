package demography

import (
	"fmt"

	"tagtally/estimators"
)

// FrequencyTable is the capture-frequency distribution.
type FrequencyTable struct {
	Occasions int `json:"occasions"`
	// Animals is the number of distinct animals caught, M_{t+1}.
	Animals int `json:"animals"`
	// Captures is the total number of captures, Σ k·f_k.
	Captures int `json:"captures"`
	// F[k-1] is f_k, the number of animals caught exactly k times, for
	// k = 1..Occasions.
	F []int `json:"f"`
	// MeanCaptures is Captures/Animals.
	MeanCaptures float64 `json:"mean_captures"`
}

// CaptureFrequencies counts f_k, the number of animals caught on exactly
// k of the t occasions (Otis et al. 1978), from capture histories. Invalid
// histories (ragged rows, an animal never caught) are rejected by
// Histories.Validate.
func CaptureFrequencies(h *estimators.Histories) (*FrequencyTable, error) {
	if err := h.Validate(); err != nil {
		return nil, fmt.Errorf("capture frequencies: %w", err)
	}
	t := h.Occasions()
	ft := &FrequencyTable{Occasions: t, Animals: h.Animals(), F: make([]int, t)}
	for _, row := range h.Caught {
		k := 0
		for _, c := range row {
			if c {
				k++
			}
		}
		ft.F[k-1]++ // Validate guarantees k ≥ 1
		ft.Captures += k
	}
	ft.MeanCaptures = float64(ft.Captures) / float64(ft.Animals)
	return ft, nil
}
