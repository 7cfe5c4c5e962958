package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
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

func openHistoriesFile(t *testing.T, text string) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), "open.csv")
	if err := os.WriteFile(path, []byte(text), 0o600); err != nil {
		t.Fatal(err)
	}
	return path
}

func TestEstimateOpenJSON(t *testing.T) {
	var out bytes.Buffer
	path := openHistoriesFile(t, openHistoriesCSV(false))
	if err := runEstimate([]string{"--open", "--json", "--histories", path}, &out); err != nil {
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
	path := openHistoriesFile(t, openHistoriesCSV(true))
	if err := runEstimate([]string{"--open", "--histories", path}, &out); err != nil {
		t.Fatal(err)
	}
	s := out.String()
	for _, want := range []string{"450 animals, 6 occasions", "Jolly-Seber", "phi(.) p(.)", "phi(g) p(.)", "Groups: female, male", "ranked by AICc", "permits", "Assumptions:", "not identifiable"} {
		if !strings.Contains(s, want) {
			t.Errorf("text output lacks %q:\n%s", want, s)
		}
	}
}

func TestEstimateOpenOverdispersion(t *testing.T) {
	var out bytes.Buffer
	path := openHistoriesFile(t, openHistoriesCSV(false))
	if err := runEstimate([]string{"--open", "--c-hat", "1.8", "--histories", path}, &out); err != nil {
		t.Fatal(err)
	}
	if s := out.String(); !strings.Contains(s, "ranked by QAICc") || !strings.Contains(s, "c-hat = 1.800") {
		t.Errorf("c-hat not applied:\n%s", s)
	}
}

func TestEstimateOpenBadInput(t *testing.T) {
	for name, c := range map[string]struct{ csv, want string }{
		"two occasions": {"id,history\nA1,11\nA2,10\nA3,01\n", "too few occasions"},
		"no recaptures": {"id,history\nA1,100\nA2,010\nA3,001\n", "no recaptures"},
		"all lost":      {"id,history,removed\nA1,100,1\nA2,010,1\nA3,001,0\n", "no recaptures"},
	} {
		var out bytes.Buffer
		err := runEstimate([]string{"--open", "--histories", openHistoriesFile(t, c.csv)}, &out)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: err = %v, want %q", name, err, c.want)
		}
	}
}

// TestEstimateOpenGoodnessOfFit: the report carries TEST 2 + TEST 3 and
// takes c-hat from it (its c-hat when above 1, else 1) unless --c-hat is
// given, which then wins.
func TestEstimateOpenGoodnessOfFit(t *testing.T) {
	type report struct {
		GOF *struct {
			CHat    float64 `json:"c_hat"`
			Overall struct {
				ChiSquare float64 `json:"chi_square"`
				DF        int     `json:"df"`
			}
		} `json:"goodness_of_fit"`
		CHat       float64 `json:"c_hat"`
		CHatSource string  `json:"c_hat_source"`
		CJS        struct {
			Criterion string `json:"criterion"`
			Models    []struct {
				Name   string   `json:"name"`
				LogLik float64  `json:"loglik"`
				Params int      `json:"params"`
				AICc   float64  `json:"aicc"`
				QAICc  *float64 `json:"qaicc"`
			} `json:"models"`
		} `json:"cjs"`
	}
	for _, grouped := range []bool{false, true} {
		path := openHistoriesFile(t, openHistoriesCSV(grouped))
		var out bytes.Buffer
		if err := runEstimate([]string{"--open", "--json", "--histories", path}, &out); err != nil {
			t.Fatal(err)
		}
		var rep report
		if err := json.Unmarshal(out.Bytes(), &rep); err != nil {
			t.Fatal(err)
		}
		if rep.GOF == nil || rep.GOF.Overall.DF == 0 {
			t.Fatalf("grouped %v: no goodness of fit: %s", grouped, out.String())
		}
		if got := rep.GOF.Overall.ChiSquare / float64(rep.GOF.Overall.DF); got != rep.GOF.CHat {
			t.Errorf("c-hat %g, chi-square/df %g", rep.GOF.CHat, got)
		}
		want := max(1, rep.GOF.CHat)
		wantCrit := "AICc"
		if want > 1 {
			wantCrit = "QAICc"
		}
		if rep.CHat != want || rep.CHatSource != "goodness of fit" || rep.CJS.Criterion != wantCrit {
			t.Errorf("grouped %v: c-hat %g from %q, criterion %s; want %g from the test, %s", grouped, rep.CHat, rep.CHatSource, rep.CJS.Criterion, want, wantCrit)
		}
		for _, m := range rep.CJS.Models {
			if (m.QAICc != nil) != (want > 1) {
				t.Errorf("grouped %v: %s qaicc %v with c-hat %g", grouped, m.Name, m.QAICc, want)
			}
		}
		out.Reset()
		if err := runEstimate([]string{"--open", "--json", "--c-hat", "2.5", "--histories", path}, &out); err != nil {
			t.Fatal(err)
		}
		rep = report{}
		if err := json.Unmarshal(out.Bytes(), &rep); err != nil {
			t.Fatal(err)
		}
		if rep.CHat != 2.5 || rep.CHatSource != "--c-hat" || rep.CJS.Criterion != "QAICc" {
			t.Errorf("--c-hat 2.5: c-hat %g from %q, criterion %s", rep.CHat, rep.CHatSource, rep.CJS.Criterion)
		}
		// aicc stays AICc; qaicc is added. Their difference follows from
		// the two formulas (Burnham & Anderson 2002, sec. 2.5) for any
		// sample size n: QAICc - AICc = (-2lnL)(1/c - 1) + 2 + [2(K+1)(K+2)/(n-K-2) - 2K(K+1)/(n-K-1)],
		// the bracket positive and small here (n in the hundreds).
		for _, m := range rep.CJS.Models {
			if m.QAICc == nil {
				t.Errorf("--c-hat 2.5: %s has no qaicc", m.Name)
				continue
			}
			d := *m.QAICc - m.AICc - (-2*m.LogLik*(1/2.5-1) + 2)
			if d <= 0 || d > 1 {
				t.Errorf("%s: QAICc %.3f, AICc %.3f: small-sample terms differ by %.3f", m.Name, *m.QAICc, m.AICc, d)
			}
		}
	}
	var out bytes.Buffer
	if err := runEstimate([]string{"--open", "--histories", openHistoriesFile(t, openHistoriesCSV(false))}, &out); err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"Goodness of fit of the CJS model phi(t) p(t)", "TEST 3.SR", "TEST 2 + TEST 3", "c-hat used for the model table"} {
		if !strings.Contains(out.String(), want) {
			t.Errorf("text output lacks %q", want)
		}
	}
}
