package main

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"mime/multipart"
	"net/http"
	"net/url"
	"os"
	"path/filepath"
	"runtime/debug"
	"strconv"
	"strings"
	"time"

	"tagtally/capture"
	"tagtally/export"
	tsync "tagtally/sync"
)

const exportHelp = `
Writes a study as one spreadsheet workbook (XLSX) for the program office:
a summary with the headline estimates, their confidence intervals, the
cautions and the assumptions behind them; every capture record; one row
per animal with its capture history; the per-occasion table and m-array;
the model tables; demography; density; and every open data-check finding.

With --csv FOLDER it writes each table as its own CSV file instead, plus
histories.csv (id, history, covariates) for other analysis tools.

If "tagtally serve" is running with the data file, the export is taken
through it (give its --port); the crews need not stop.`

func runExport(args []string, stdout io.Writer) error {
	cfg, err := defaultConfig()
	if err != nil {
		return err
	}
	fs := newFlagSet("export", "tagtally export --study ID --out FILE.xlsx | --csv FOLDER [options]", exportHelp)
	fs.SetOutput(stdout)
	cfg.addDataFlag(fs)
	cfg.addPortFlag(fs, "the port of the running server, if it is running")
	study := fs.String("study", "", "the study's ID (required)")
	out := fs.String("out", "", "the workbook to write, e.g. quillmoor-2026.xlsx")
	csvDir := fs.String("csv", "", "write CSV files into this folder instead of a workbook")
	if err := parseArgs(fs, args, 0); err != nil {
		return err
	}
	if *study == "" || (*out == "") == (*csvDir == "") {
		return fmt.Errorf("%w: give --study and one of --out FILE.xlsx or --csv FOLDER", errUsage)
	}
	if err := cfg.validate(); err != nil {
		return err
	}
	// A soft heap limit keeps a large study's export flat in memory
	// (see export.MemoryLimit and BenchmarkExport100k).
	defer debug.SetMemoryLimit(debug.SetMemoryLimit(export.MemoryLimit))
	store, err := openStore(cfg.Data)
	if errors.Is(err, errInUse) {
		return exportThroughServer(cfg.Data, cfg.Port, *study, *out, *csvDir, stdout)
	}
	if err != nil {
		return err
	}
	defer store.Close()
	e, err := export.LoadStudy(store, *study, version, time.Now())
	if err != nil {
		return err
	}
	if *out != "" {
		err = writeFileAtomically(*out, 0o644, func(w io.Writer) error { return e.WriteXLSX(w, "") })
		if err == nil {
			fmt.Fprintf(stdout, "Wrote %s: %d sheets, %d animals, %d open data-check findings.\n", *out, len(e.Sheets()), e.Report.Animals, len(e.Checks))
		}
		return err
	}
	if err := os.MkdirAll(*csvDir, 0o755); err != nil {
		return err
	}
	names := append([]string{"histories"}, e.TableNames()...)
	for _, name := range names {
		path := filepath.Join(*csvDir, name+".csv")
		err := writeFileAtomically(path, 0o644, func(w io.Writer) error {
			if name == "histories" {
				return capture.WriteHistoryCSV(w, e.Report.Histories)
			}
			sh, _ := e.Table(name)
			return export.WriteCSV(w, sh)
		})
		if err != nil {
			return err
		}
	}
	fmt.Fprintf(stdout, "Wrote %d CSV files into %s: %s.\n", len(names), *csvDir, strings.Join(names, ", "))
	return nil
}

// exportThroughServer fetches the workbook or the CSV tables from the
// server running on this machine.
func exportThroughServer(data string, port int, study, out, csvDir string, stdout io.Writer) error {
	base := "http://127.0.0.1:" + strconv.Itoa(port)
	if err := isTagtally(base); err != nil {
		return fmt.Errorf("%w, and no tagtally server answered at %s (%v)", errInUse, base, err)
	}
	get := func(path, dest string) error {
		req, err := localRequest(data, http.MethodGet, base+path, nil)
		if err != nil {
			return err
		}
		resp, err := (&http.Client{Timeout: 30 * time.Minute}).Do(req)
		if err != nil {
			return err
		}
		defer resp.Body.Close()
		if resp.StatusCode != http.StatusOK {
			msg, _ := io.ReadAll(io.LimitReader(resp.Body, 4096))
			return fmt.Errorf("export through the server: %s: %s", resp.Status, msg)
		}
		return writeAtomically(dest, resp.Body, resp.ContentLength)
	}
	prefix := "/api/v1/studies/" + url.PathEscape(study)
	if out != "" {
		if err := get(prefix+"/export.xlsx", out); err != nil {
			return err
		}
		fmt.Fprintf(stdout, "Wrote %s through the running server.\n", out)
		return nil
	}
	if err := os.MkdirAll(csvDir, 0o755); err != nil {
		return err
	}
	for _, name := range []string{"histories", "summary", "captures", "individuals", "occasions", "closed", "open", "survival", "demography", "density", "dispersion", "checks"} {
		err := get(prefix+"/export/"+name+".csv", filepath.Join(csvDir, name+".csv"))
		if err != nil && !strings.Contains(err.Error(), "404") {
			return err
		}
	}
	fmt.Fprintf(stdout, "Wrote the study's CSV tables into %s through the running server.\n", csvDir)
	return nil
}

// writeFileAtomically writes through a temporary file beside path, synced
// and renamed into place with mode perm, so a reader never sees half a
// file and a failure leaves nothing behind.
func writeFileAtomically(path string, perm os.FileMode, write func(io.Writer) error) error {
	tmp, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp-*")
	if err != nil {
		return err
	}
	defer os.Remove(tmp.Name()) // fails harmlessly after the rename
	err = write(tmp)
	if err == nil {
		err = tmp.Sync()
	}
	if cerr := tmp.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Chmod(tmp.Name(), perm)
	}
	if err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	return os.Rename(tmp.Name(), path)
}

const importHelp = `
Reads older data into a study: a CSV file, an XLSX workbook (the sheet
named Captures, or the first sheet), or the outbox backup file the phone
app saves. Column headers are matched to fields whatever their case
("Tag", "tag_id", "Band number" all mean the tag); for other headers give a
mapping file of lines "file column,field".

Every row is checked against the study (tag formats, stations, dates,
numbers). If any row has a problem, the report lists each one (row,
column, value, reason) and nothing is written. Otherwise all rows are
written in one transaction, as records that sync to phones and other
servers like any others. Importing the same file twice adds nothing.

If "tagtally serve" is running with the data file, the import goes
through it (give its --port).`

func runImport(args []string, stdout io.Writer) error {
	cfg, err := defaultConfig()
	if err != nil {
		return err
	}
	fs := newFlagSet("import", "tagtally import --study ID [options] FILE", importHelp)
	fs.SetOutput(stdout)
	cfg.addDataFlag(fs)
	cfg.addPortFlag(fs, "the port of the running server, if it is running")
	study := fs.String("study", "", "the study to import into (required)")
	mappingFile := fs.String("mapping", "", "a CSV file of lines 'file column,field' for headers not recognised")
	dry := fs.Bool("dry-run", false, "check the file and show the report without writing anything")
	sheet := fs.String("sheet", "", "the workbook sheet to read (default: Captures, or the first)")
	zone := fs.String("time-zone", "UTC", "time zone of times written without one, e.g. Europe/Lisbon")
	asJSON := fs.Bool("json", false, "print the report as JSON")
	if err := parseArgs(fs, args, 1); err != nil {
		return err
	}
	if *study == "" || fs.NArg() != 1 {
		return fmt.Errorf("%w: give --study ID and the file to import", errUsage)
	}
	if err := cfg.validate(); err != nil {
		return err
	}
	loc, err := time.LoadLocation(*zone)
	if err != nil {
		return fmt.Errorf("%w: --time-zone %q: %v", errUsage, *zone, err)
	}
	path := fs.Arg(0)
	data, err := os.ReadFile(path)
	if err != nil {
		return err
	}
	opts := export.Options{Sheet: *sheet, Location: loc}
	var mapping []byte
	if *mappingFile != "" {
		if mapping, err = os.ReadFile(*mappingFile); err != nil {
			return err
		}
		if opts.Mapping, err = export.ReadMapping(mapping); err != nil {
			return fmt.Errorf("%w: %v", errUsage, err)
		}
	}
	var rep *export.Report
	store, err := openStore(cfg.Data)
	switch {
	case errors.Is(err, errInUse):
		if *zone != "UTC" {
			return fmt.Errorf("%w: --time-zone works only on the data file directly; stop the server or write zones into the file's times", errUsage)
		}
		rep, err = importThroughServer(cfg.Data, cfg.Port, *study, path, data, mapping, *dry)
	case err != nil:
		return err
	default:
		defer store.Close()
		var st *capture.Study
		if st, err = store.GetStudy(*study); err != nil {
			return err
		}
		var eng *tsync.Engine
		if eng, err = tsync.Open(store, nil); err != nil {
			return err
		}
		defer eng.Close()
		rep, err = export.Import(st, data, opts, *dry, export.SyncWriter(eng, "import:"+filepath.Base(path)))
	}
	if rep != nil {
		printImportReport(stdout, rep, *dry, *asJSON)
	}
	return err
}

func printImportReport(w io.Writer, rep *export.Report, dry, asJSON bool) {
	if asJSON {
		enc := json.NewEncoder(w)
		enc.SetIndent("", "  ")
		enc.Encode(rep)
		return
	}
	fmt.Fprintf(w, "Rows read: %d; valid: %d.\n", rep.Rows, rep.Valid)
	for file, field := range rep.Mapping {
		fmt.Fprintf(w, "  column %q -> %s\n", file, field)
	}
	for _, p := range rep.Problems {
		fmt.Fprintln(w, "PROBLEM", p.String())
	}
	for _, n := range rep.Notes {
		fmt.Fprintln(w, "note:", n.String())
	}
	for row, fs := range rep.Findings {
		for _, f := range fs {
			fmt.Fprintf(w, "check row %d: %s\n", row, f.Message)
		}
	}
	switch {
	case len(rep.Problems) > 0:
		fmt.Fprintln(w, "Nothing was imported: correct the rows above and run again.")
	case dry:
		fmt.Fprintln(w, "Dry run: nothing was written.")
	default:
		fmt.Fprintf(w, "Imported %d records.\n", rep.Written)
	}
}

func importThroughServer(dataFile string, port int, study, path string, data, mapping []byte, dry bool) (*export.Report, error) {
	base := "http://127.0.0.1:" + strconv.Itoa(port)
	if err := isTagtally(base); err != nil {
		return nil, fmt.Errorf("%w, and no tagtally server answered at %s (%v)", errInUse, base, err)
	}
	var body bytes.Buffer
	mw := multipart.NewWriter(&body)
	fw, _ := mw.CreateFormFile("file", filepath.Base(path))
	fw.Write(data)
	if mapping != nil {
		mf, _ := mw.CreateFormFile("mapping", "mapping.csv")
		mf.Write(mapping)
	}
	mw.Close()
	u := base + "/api/v1/studies/" + url.PathEscape(study) + "/import?dry_run=" + strconv.FormatBool(dry)
	req, err := localRequest(dataFile, http.MethodPost, u, &body)
	if err != nil {
		return nil, err
	}
	req.Header.Set("Content-Type", mw.FormDataContentType())
	resp, err := (&http.Client{Timeout: 10 * time.Minute}).Do(req)
	if err != nil {
		return nil, err
	}
	defer resp.Body.Close()
	var ans struct {
		Error  string         `json:"error"`
		Report *export.Report `json:"report"`
	}
	raw, _ := io.ReadAll(io.LimitReader(resp.Body, 64<<20))
	if err := json.Unmarshal(raw, &ans); err != nil {
		return nil, fmt.Errorf("import through the server: %s: %.200s", resp.Status, raw)
	}
	if resp.StatusCode == http.StatusUnprocessableEntity {
		return ans.Report, export.ErrProblems
	}
	if resp.StatusCode != http.StatusOK {
		return ans.Report, fmt.Errorf("import through the server: %s: %s", resp.Status, ans.Error)
	}
	return ans.Report, nil
}
