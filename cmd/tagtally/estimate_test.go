package main

import (
	"bufio"
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"tagtally/capture"
	"tagtally/capture/storetest"
)

// writeHistoryCSV writes the invented 8-occasion histories of package
// closed's testdata with an invented sex and mass column.
func writeHistoryCSV(t *testing.T) string {
	t.Helper()
	b, err := os.ReadFile("../../estimators/closed/testdata/mth-invented.csv")
	if err != nil {
		t.Fatal(err)
	}
	var out strings.Builder
	out.WriteString("id,history,sex,mass\n")
	for i, line := range strings.Split(strings.TrimSpace(string(b)), "\n")[1:] {
		sex := []string{"f", "m"}[i%2]
		fmt.Fprintf(&out, "%s,%s,%.1f\n", strings.TrimSpace(line), sex, 18+float64(i%9))
	}
	path := filepath.Join(t.TempDir(), "histories.csv")
	if err := os.WriteFile(path, []byte(out.String()), 0o600); err != nil {
		t.Fatal(err)
	}
	return path
}

func TestEstimateTable(t *testing.T) {
	path := writeHistoryCSV(t)
	var buf bytes.Buffer
	if err := runEstimate([]string{"--histories", path}, &buf); err != nil {
		t.Fatal(err)
	}
	out := buf.String()
	for _, want := range []string{
		"119 animals, 8 occasions", "ranked by AICc", "Model-averaged N:", "M0", "Mth", "Huggins p(male + mass)",
		"Jackknife (Burnham-Overton)", "Chao Mh", "Schnabel", "Interval kinds:", "Assumptions shared", "permits", "animal-welfare",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("table output lacks %q:\n%s", want, out)
		}
	}
}

func TestEstimateJSON(t *testing.T) {
	path := writeHistoryCSV(t)
	var buf bytes.Buffer
	if err := runEstimate([]string{"--histories", path, "--json"}, &buf); err != nil {
		t.Fatal(err)
	}
	sc := bufio.NewScanner(&buf)
	sc.Buffer(make([]byte, 1<<20), 1<<20)
	seen := map[string]map[string]any{}
	for sc.Scan() {
		var o map[string]any
		if err := json.Unmarshal(sc.Bytes(), &o); err != nil {
			t.Fatalf("line %q: %v", sc.Text(), err)
		}
		id, _ := o["id"].(string)
		seen[id] = o
		if _, ok := o["error"]; ok {
			continue
		}
		for _, k := range []string{"name", "N", "se", "ci_low", "ci_high"} {
			if _, ok := o[k]; !ok {
				t.Errorf("%s: no %q in %v", id, k, o)
			}
		}
	}
	for _, id := range []string{"m0", "mt", "mb", "mh", "mth", "mtb"} {
		o := seen[id]
		if o == nil {
			t.Fatalf("no line for %s", id)
		}
		if _, ok := o["error"]; ok {
			continue
		}
		for _, k := range []string{"loglik", "params", "aicc", "delta", "weight"} {
			if _, ok := o[k]; !ok {
				t.Errorf("%s: no %q", id, k)
			}
		}
	}
	if seen["averaged"] == nil || seen["chao-mh"] == nil {
		t.Errorf("missing lines: %v", seen)
	}
	if _, ok := seen["chao-mh"]["aicc"]; ok {
		t.Errorf("Chao Mh has no likelihood but printed an AICc")
	}
}

func TestEstimateOneModelMatchesPackage(t *testing.T) {
	path := writeHistoryCSV(t)
	var buf bytes.Buffer
	if err := runEstimate([]string{"--histories", path, "--model", "chao-mh", "--json"}, &buf); err != nil {
		t.Fatal(err)
	}
	var o struct {
		ID string  `json:"id"`
		N  float64 `json:"N"`
	}
	if err := json.Unmarshal(bytes.TrimSpace(buf.Bytes()), &o); err != nil {
		t.Fatalf("%q: %v", buf.String(), err)
	}
	// The frequencies of the invented file give f1 = 33, f2 = 32, S = 119;
	// Chao (1987) by hand: 119 + 33²/64 = 136.015625.
	if o.ID != "chao-mh" || math.Abs(o.N-(119+33.0*33/64)) > 1e-9 {
		t.Errorf("got %+v", o)
	}
	buf.Reset()
	if err := runEstimate([]string{"--histories", path, "--model", "jackknife"}, &buf); err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"N = ", "N[order 1]", "Assumptions:", "Burnham, K.P. & Overton"} {
		if !strings.Contains(buf.String(), want) {
			t.Errorf("detail lacks %q:\n%s", want, buf.String())
		}
	}
}

func TestEstimateBadInput(t *testing.T) {
	dir := t.TempDir()
	write := func(name, body string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(body), 0o600); err != nil {
			t.Fatal(err)
		}
		return p
	}
	noRecap := write("norecap.csv", "id,history\nA,100\nB,010\nC,001\n")
	empty := write("empty.csv", "id,history\n")
	bad := write("bad.csv", "id,history\nA,1x0\n")
	single := write("single.csv", "id,history\nA,1\nB,1\n")
	var buf bytes.Buffer
	for _, c := range []struct {
		args  []string
		usage bool
		text  string
	}{
		{nil, true, "--histories"},
		{[]string{"--histories", noRecap, "--study", "x"}, true, "not both"},
		{[]string{"--histories", filepath.Join(dir, "missing.csv")}, false, "no such file"},
		{[]string{"--histories", empty}, false, "no animals"},
		{[]string{"--histories", bad}, false, "line 2"},
		{[]string{"--histories", noRecap, "--model", "nonesuch"}, true, "unknown model"},
		{[]string{"--histories", noRecap, "--model", "m0"}, false, "no recaptures"},
		{[]string{"--histories", noRecap, "--c-hat", "0.5"}, true, "c-hat"},
	} {
		buf.Reset()
		err := runEstimate(c.args, &buf)
		if err == nil || !strings.Contains(err.Error(), c.text) || errors.Is(err, errUsage) != c.usage {
			t.Errorf("%v: err %v (usage %v), want %q", c.args, err, errors.Is(err, errUsage), c.text)
		}
	}
	// The whole table on data without recaptures still prints, with reasons.
	buf.Reset()
	if err := runEstimate([]string{"--histories", noRecap}, &buf); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(buf.String(), "No estimate:") || !strings.Contains(buf.String(), "no recaptures") || strings.Contains(buf.String(), "NaN") {
		t.Errorf("no-recapture table:\n%s", buf.String())
	}
	buf.Reset()
	if err := runEstimate([]string{"--histories", single, "--json"}, &buf); err != nil {
		t.Fatal(err)
	}
	if strings.Contains(buf.String(), "NaN") || !strings.Contains(buf.String(), "error") {
		t.Errorf("single occasion: %s", buf.String())
	}
}

func TestEstimateStoredStudy(t *testing.T) {
	path := filepath.Join(t.TempDir(), "camp.db")
	s, err := capture.Open(path, capture.DefaultOptions)
	if err != nil {
		t.Fatal(err)
	}
	st := storetest.Study()
	if err := s.CreateStudy(st); err != nil {
		t.Fatal(err)
	}
	// 24 invented animals over the study's 5 occasions: animal i is caught
	// k = 1 + i%4 times, on the occasions j with (j - i) mod 5 < k.
	for i := 0; i < 24; i++ {
		first := true
		for j := 0; j < 5; j++ {
			if ((j-i)%5+5)%5 >= 1+i%4 {
				continue
			}
			ev := capture.EventRecapture
			if first {
				ev, first = capture.EventNewMark, false
			}
			c := &capture.Capture{
				StudyID: st.ID, TagID: fmt.Sprintf("BF-%04d", i+1), Event: ev, StationID: "A1",
				Species: "bank vole", Sex: capture.SexFemale, Age: capture.AgeAdult, Fate: capture.FateReleased,
				Observer: "crew 1", CapturedAt: st.Occasions[j].Start.Add(time.Duration(30+i) * time.Minute),
			}
			if _, _, err := s.CreateCapture(c); err != nil {
				t.Fatal(err)
			}
		}
	}
	want, err := s.Histories(st.ID, nil)
	if err != nil {
		t.Fatal(err)
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := runEstimate([]string{"--study", st.ID, "--data", path, "--model", "chao-mh", "--json"}, &buf); err != nil {
		t.Fatal(err)
	}
	var o struct{ N float64 }
	if err := json.Unmarshal(bytes.TrimSpace(buf.Bytes()), &o); err != nil {
		t.Fatal(err)
	}
	// Independent of the command: frequencies counted from the store's
	// histories and Chao's (1987) formula S + f1²/(2 f2).
	var f [6]int
	for _, a := range want.Animals {
		k := 0
		for _, c := range a.Caught {
			if c {
				k++
			}
		}
		f[k]++
	}
	s0 := len(want.Animals)
	if s0 != 24 || f[1] != 6 || f[2] != 6 {
		t.Fatalf("store gave %d animals, f = %v", s0, f)
	}
	if exp := float64(s0) + float64(f[1]*f[1])/float64(2*f[2]); math.Abs(o.N-exp) > 1e-9 {
		t.Errorf("stored study Chao Mh %v, want %v", o.N, exp)
	}
	buf.Reset()
	if err := runEstimate([]string{"--study", "no-such-study", "--data", path}, &buf); err == nil {
		t.Errorf("unknown study: no error")
	}
}

// TestEstimateAverageOfBoundaryFlagged: a removed column is read, and a
// model average built on boundary estimates carries boundary and a warning
// in the JSON and a warning line in the table.
func TestEstimateAverageOfBoundaryFlagged(t *testing.T) {
	path := filepath.Join(t.TempDir(), "h.csv")
	// Invented: 8 animals, 3 occasions, nearly all recaptured, 2 lost.
	data := "id,history,removed\nA1,110,0\nA2,011,1\nA3,100,0\nA4,111,0\nA5,010,1\nA6,101,0\nA7,001,0\nA8,110,0\n"
	if err := os.WriteFile(path, []byte(data), 0o600); err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := runEstimate([]string{"--histories", path, "--json"}, &buf); err != nil {
		t.Fatal(err)
	}
	var avg map[string]any
	for _, line := range strings.Split(strings.TrimSpace(buf.String()), "\n") {
		var o map[string]any
		if err := json.Unmarshal([]byte(line), &o); err != nil {
			t.Fatalf("%q: %v", line, err)
		}
		if o["id"] == "averaged" {
			avg = o
		}
	}
	if avg == nil || avg["boundary"] != true || avg["warnings"] == nil {
		t.Fatalf("averaged line %v", avg)
	}
	buf.Reset()
	if err := runEstimate([]string{"--histories", path}, &buf); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(buf.String(), "Warning: the average leans on boundary estimates") || !strings.Contains(buf.String(), "8 animals, 3 occasions") {
		t.Errorf("table:\n%s", buf.String())
	}
}
