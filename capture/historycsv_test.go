package capture_test

import (
	"bytes"
	"errors"
	"flag"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"tagtally/capture"
	"tagtally/capture/storetest"
)

var update = flag.Bool("update", false, "rewrite golden files in testdata/")

func TestReadHistoryCSV(t *testing.T) {
	in := "\ufeffID, History ,Sex,AGE,Mass_g,wing,removed\n" +
		"BF-0001,10110,f,adult,21.5,61,no\n" +
		"BF-0002,00011,male,,,,1\n" +
		"BF-0003,11111,,j,19,58.5,\n"
	h, err := capture.ReadHistoryCSV(strings.NewReader(in))
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(h.Occasions, []int{1, 2, 3, 4, 5}) || len(h.Animals) != 3 {
		t.Fatalf("shape: %v, %d animals", h.Occasions, len(h.Animals))
	}
	a := h.Animals[0]
	if a.ID != "BF-0001" || a.String() != "10110" || a.Sex != capture.SexFemale || a.Age != capture.AgeAdult ||
		a.MassG == nil || *a.MassG != 21.5 || a.Covariates["wing"] != 61 || a.Removed || a.Captures != 3 {
		t.Errorf("row 1: %+v", a)
	}
	b := h.Animals[1]
	if !b.Removed || b.MassG != nil || b.Covariates != nil || b.Sex != capture.SexMale {
		t.Errorf("row 2: %+v", b)
	}
	if c := h.Animals[2]; c.Age != capture.AgeJuvenile || c.Covariates["wing"] != 58.5 {
		t.Errorf("row 3: %+v", c)
	}
}

func TestReadHistoryCSVErrors(t *testing.T) {
	for _, tc := range []struct {
		name      string
		in        string
		line, col int
	}{
		{"empty file", "", 1, 0},
		{"no history column", "id,sex\nA,f\n", 1, 0},
		{"duplicate column", "id,history,Sex,sex\n", 1, 4},
		{"mass twice", "id,history,mass,mass_g\n", 1, 4},
		{"empty column name", "id,history,\n", 1, 3},
		{"bad character", "id,history\nA,0110\nB,01x0\n", 3, 2},
		{"short history", "id,history\nA,0110\nB,010\n", 3, 2},
		{"never caught", "id,history\nA,0000\n", 2, 2},
		{"duplicate id", "id,history\nA,01\nA,10\n", 3, 1},
		{"id with spaces", "id,history\n A ,01\n", 2, 1},
		{"bad sex", "id,history,sex\nA,01,x\n", 2, 3},
		{"bad age", "id,history,age\nA,01,old\n", 2, 3},
		{"zero mass", "id,history,mass\nA,01,0\n", 2, 3},
		{"NaN covariate", "id,history,wing\nA,01,NaN\n", 2, 3},
		{"huge covariate", "id,history,wing\nA,01,1e999\n", 2, 3},
		{"text covariate", "id,history,wing\nA,01,long\n", 2, 3},
		{"bad removed", "id,history,removed\nA,01,maybe\n", 2, 3},
		{"wrong field count", "id,history\nA,01,1\n", 2, 0},
		{"bare quote", "id,history\nA\"B,01\n", 2, 0},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := capture.ReadHistoryCSV(strings.NewReader(tc.in))
			var pe *capture.HistoryCSVError
			if !errors.As(err, &pe) || !errors.Is(err, capture.ErrInvalid) {
				t.Fatalf("got %v, want a HistoryCSVError", err)
			}
			if pe.Line != tc.line || pe.Column != tc.col {
				t.Errorf("at line %d column %d (%v), want line %d column %d", pe.Line, pe.Column, err, tc.line, tc.col)
			}
		})
	}
}

func TestHistoryCSVGolden(t *testing.T) {
	h, err := capture.BuildHistories(storetest.Study(), handExample(), nil)
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := capture.WriteHistoryCSV(&buf, h); err != nil {
		t.Fatal(err)
	}
	golden := filepath.Join("testdata", "historycsv", "hand-example.csv")
	if *update {
		if err := os.WriteFile(golden, buf.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(golden)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(buf.Bytes(), want) {
		t.Errorf("WriteHistoryCSV differs from %s (run with -update if the change is intended):\n%s", golden, buf.String())
	}
	back, err := capture.ReadHistoryCSV(&buf)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(histByID(back), histByID(h)) || !reflect.DeepEqual(back.Summary(), h.Summary()) || !reflect.DeepEqual(back.MArray(), h.MArray()) {
		t.Errorf("histories read back differ")
	}
}

func TestWriteHistoryCSVRefuses(t *testing.T) {
	for name, h := range map[string]*capture.HistorySet{
		"ragged":        {Occasions: []int{1, 2}, Animals: []capture.AnimalHistory{{ID: "A", Caught: []bool{true}}}},
		"never caught":  {Occasions: []int{1, 2}, Animals: []capture.AnimalHistory{{ID: "A", Caught: []bool{false, false}}}},
		"duplicate":     {Occasions: []int{1}, Animals: []capture.AnimalHistory{{ID: "A", Caught: []bool{true}}, {ID: "A", Caught: []bool{true}}}},
		"reserved name": {Occasions: []int{1}, Animals: []capture.AnimalHistory{{ID: "A", Caught: []bool{true}, Covariates: map[string]float64{"sex": 1}}}},
	} {
		if err := capture.WriteHistoryCSV(&bytes.Buffer{}, h); !errors.Is(err, capture.ErrInvalid) {
			t.Errorf("%s: got %v, want ErrInvalid", name, err)
		}
	}
}

// FuzzHistoryCSV: whatever ReadHistoryCSV accepts, WriteHistoryCSV writes
// and ReadHistoryCSV reads back to the same set; whatever it rejects, it
// rejects with a positioned error, never a panic.
func FuzzHistoryCSV(f *testing.F) {
	f.Add("id,history\nA,01\n")
	f.Add("ID,History,sex,age,mass,wing,removed\nBF-1,1101,f,a,21.5,60,yes\nBF-2,0011,,,,,0\n")
	f.Add("id,history,group,species\n\"a,b\",1, x ,vole\n")
	f.Add("id,history,w\nA,1,-0\nB,1,1e-300\n")
	f.Fuzz(func(t *testing.T, in string) {
		h, err := capture.ReadHistoryCSV(strings.NewReader(in))
		if err != nil {
			var pe *capture.HistoryCSVError
			if !errors.As(err, &pe) {
				t.Fatalf("error without position: %v", err)
			}
			return
		}
		var buf bytes.Buffer
		if err := capture.WriteHistoryCSV(&buf, h); err != nil {
			t.Fatalf("cannot write what was read: %v", err)
		}
		first := buf.String()
		back, err := capture.ReadHistoryCSV(&buf)
		if err != nil {
			t.Fatalf("cannot read what was written: %v\n%s", err, first)
		}
		if !reflect.DeepEqual(normalise(back), normalise(h)) {
			t.Fatalf("round trip changed the set:\n%+v\n%+v", h, back)
		}
		var again bytes.Buffer
		if err := capture.WriteHistoryCSV(&again, back); err != nil || again.String() != first {
			t.Fatalf("second write differs (%v)", err)
		}
	})
}

// normalise drops what the CSV legitimately does not keep apart: an
// all-false removed column is not written, and a file with a header only
// reads back as an empty set.
func normalise(h *capture.HistorySet) *capture.HistorySet {
	c := *h
	if len(c.Animals) == 0 {
		c.Animals = nil
	}
	return &c
}
