package main

import (
	"bytes"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/xuri/excelize/v2"

	"tagtally/demo"
	"tagtally/export"
)

func TestExportAndImportCommands(t *testing.T) {
	dir := t.TempDir()
	data := filepath.Join(dir, "camp.db")
	var out bytes.Buffer
	if err := runDemo([]string{"--data", data}, &out); err != nil {
		t.Fatal(err)
	}
	st, caps := demo.Build()
	book := filepath.Join(dir, "study.xlsx")
	if err := runExport([]string{"--data", data, "--study", st.ID, "--out", book}, &out); err != nil {
		t.Fatal(err)
	}
	f, err := excelize.OpenFile(book)
	if err != nil {
		t.Fatalf("export did not write a workbook: %v", err)
	}
	rows, _ := f.GetRows("Captures")
	f.Close()
	if len(rows)-1 != len(caps) {
		t.Errorf("captures sheet has %d rows, the demo %d records", len(rows)-1, len(caps))
	}
	csvDir := filepath.Join(dir, "tables")
	if err := runExport([]string{"--data", data, "--study", st.ID, "--csv", csvDir}, &out); err != nil {
		t.Fatal(err)
	}
	for _, name := range []string{"histories.csv", "captures.csv", "occasions.csv", "closed.csv", "checks.csv"} {
		if _, err := os.Stat(filepath.Join(csvDir, name)); err != nil {
			t.Errorf("--csv did not write %s", name)
		}
	}

	bad := filepath.Join(dir, "bad.csv")
	os.WriteFile(bad, []byte("tag,date,station,mass\nQH-0901,2026-05-14 06:30,A1,twenty\n"), 0o644)
	out.Reset()
	err = runImport([]string{"--data", data, "--study", st.ID, bad}, &out)
	if !errors.Is(err, export.ErrProblems) || !strings.Contains(out.String(), `row 2, column "mass", value "twenty"`) {
		t.Errorf("bad file: %v\n%s", err, out.String())
	}
	good := filepath.Join(dir, "good.csv")
	os.WriteFile(good, []byte("tag,date,station\nQH-0901,2026-05-14 06:30,A1\n"), 0o644)
	out.Reset()
	if err := runImport([]string{"--data", data, "--study", st.ID, "--dry-run", good}, &out); err != nil || !strings.Contains(out.String(), "Dry run") {
		t.Errorf("dry run: %v\n%s", err, out.String())
	}
	if n := countRecords(t, data); n != len(caps) {
		t.Errorf("a bad file or a dry run changed the records: %d, want %d", n, len(caps))
	}
	for i := 0; i < 2; i++ {
		out.Reset()
		if err := runImport([]string{"--data", data, "--study", st.ID, good}, &out); err != nil {
			t.Fatalf("import: %v\n%s", err, out.String())
		}
	}
	if n := countRecords(t, data); n != len(caps)+1 {
		t.Errorf("after importing one row twice: %d records, want %d", n, len(caps)+1)
	}
}
