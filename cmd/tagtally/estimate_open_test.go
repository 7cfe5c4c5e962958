package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"strings"
	"testing"

	"tagtally/analysis"
	"tagtally/capture"
	"tagtally/estimators"
)

// openHistoriesCSV simulates an invented open-population study (six
// occasions, animals joining every interval, a few lost on capture) as a
// history CSV with a sex column and a group column when grouped.
func openHistoriesCSV(grouped bool) string {
	rng := rand.New(rand.NewPCG(2026, 12))
	var b strings.Builder
	b.WriteString("id,history,sex,removed")
	if grouped {
		b.WriteString(",group")
	}
	b.WriteString("\n")
	id := 0
	for first := 0; first < 5; first++ {
		for k := 0; k < 90; k++ {
			row := []byte("000000")
			sex := []string{"female", "male"}[k%2]
			phi := map[string]float64{"female": 0.75, "male": 0.6}[sex]
			removed := false
			for j := first; j < 6; j++ {
				if j > first && rng.Float64() >= phi {
					break
				}
				if j == first || rng.Float64() < 0.5 {
					row[j] = '1'
					if rng.Float64() < 0.01 {
						removed = true
						break
					}
				}
			}
			id++
			fmt.Fprintf(&b, "SR-%04d,%s,%s,%t", id, row, sex, removed)
			if grouped {
				b.WriteString("," + sex)
			}
			b.WriteString("\n")
		}
	}
	return b.String()
}

func openHistories(t *testing.T, grouped bool) *estimators.Histories {
	t.Helper()
	hs, err := capture.ReadHistoryCSV(strings.NewReader(openHistoriesCSV(grouped)))
	if err != nil {
		t.Fatal(err)
	}
	h, _, err := analysis.FromHistorySet(hs)
	if err != nil {
		t.Fatal(err)
	}
	return h
}

func TestEstimateOpenJSON(t *testing.T) {
	var out bytes.Buffer
	if err := estimateOpen(openHistories(t, false), true, &out); err != nil {
		t.Fatal(err)
	}
	var rep struct {
		Occasions  int `json:"occasions"`
		JollySeber struct {
			Occasions []map[string]json.RawMessage `json:"occasions"`
		} `json:"jolly_seber"`
		CJS struct {
			Models []struct {
				Name   string                   `json:"name"`
				LogLik *float64                 `json:"loglik"`
				Params int                      `json:"params"`
				AICc   *float64                 `json:"aicc"`
				Phi    []map[string]interface{} `json:"phi"`
				P      []map[string]interface{} `json:"p"`
			} `json:"models"`
		} `json:"cjs"`
	}
	if err := json.Unmarshal(out.Bytes(), &rep); err != nil {
		t.Fatalf("%v\n%s", err, out.String())
	}
	if rep.Occasions != 6 || len(rep.JollySeber.Occasions) != 6 {
		t.Fatalf("occasions %d, rows %d", rep.Occasions, len(rep.JollySeber.Occasions))
	}
	// Occasion 3 has every Jolly-Seber estimate, each with se and interval.
	for _, key := range []string{"N", "phi", "B", "p"} {
		var v map[string]interface{}
		if err := json.Unmarshal(rep.JollySeber.Occasions[2][key], &v); err != nil || v == nil {
			t.Fatalf("occasion 3 %s: %v %s", key, err, rep.JollySeber.Occasions[2][key])
		}
		for _, f := range []string{"estimate", "se", "ci_low", "ci_high"} {
			if _, ok := v[f]; !ok {
				t.Errorf("occasion 3 %s has no %s", key, f)
			}
		}
	}
	if len(rep.CJS.Models) != 4 {
		t.Fatalf("%d CJS models", len(rep.CJS.Models))
	}
	for _, m := range rep.CJS.Models {
		if m.Name == "" || m.LogLik == nil || m.AICc == nil || m.Params < 2 || len(m.Phi) == 0 || len(m.P) == 0 {
			t.Errorf("model %+v", m)
		}
	}
}

func TestEstimateOpenText(t *testing.T) {
	var out bytes.Buffer
	if err := estimateOpen(openHistories(t, true), false, &out); err != nil {
		t.Fatal(err)
	}
	s := out.String()
	for _, want := range []string{"Jolly-Seber", "phi(.) p(.)", "phi(g) p(.)", "Groups: female, male", "permits", "Assumptions:", "not identifiable"} {
		if !strings.Contains(s, want) {
			t.Errorf("text output lacks %q:\n%s", want, s)
		}
	}
}

func TestEstimateOpenTooFewOccasions(t *testing.T) {
	hs, err := capture.ReadHistoryCSV(strings.NewReader("id,history\nA1,11\nA2,10\nA3,01\n"))
	if err != nil {
		t.Fatal(err)
	}
	h, _, err := analysis.FromHistorySet(hs)
	if err != nil {
		t.Fatal(err)
	}
	var out bytes.Buffer
	if err := estimateOpen(h, false, &out); err == nil || !strings.Contains(err.Error(), "too few occasions") {
		t.Errorf("err = %v", err)
	}
}
