package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"os"
	"path/filepath"
	"strconv"
	"time"

	"tagtally/capture"
)

const backupHelp = `
Copies the data file to PATH: a complete, consistent copy of every study
and record, which "tagtally serve --data PATH" can open like the original.
If PATH is a folder (a USB stick, say), the copy is named
tagtally-backup-DATE-TIME.db inside it.

It works whether or not the server is running. When the server is running
it holds the data file, so the copy is taken through the server on this
computer (at 127.0.0.1 and the --port it listens on) while it keeps serving;
the crews need not stop. The copy is written to a temporary file first and
renamed when complete, then opened and checked, so a copy that reports
success is whole.`

func runBackup(args []string, stdout io.Writer) error {
	cfg, err := defaultConfig()
	if err != nil {
		return err
	}
	fs := newFlagSet("backup", "tagtally backup [options] PATH", backupHelp)
	fs.SetOutput(stdout)
	cfg.addDataFlag(fs)
	cfg.addPortFlag(fs, "the port of the running server, if it is running")
	force := fs.Bool("force", false, "replace PATH if it is an existing file")
	if err := parseArgs(fs, args, 1); err != nil {
		return err
	}
	if fs.NArg() != 1 {
		return fmt.Errorf("%w: say where to write the copy: tagtally backup PATH", errUsage)
	}
	if err := cfg.validate(); err != nil {
		return err
	}
	dest, err := backupDest(fs.Arg(0), cfg.Data, *force)
	if err != nil {
		return err
	}
	if _, err := os.Stat(cfg.Data); err != nil {
		return fmt.Errorf("no data file to back up: %w", err)
	}
	how := "from the data file"
	store, err := openStore(cfg.Data)
	switch {
	case err == nil:
		err = store.BackupToFile(dest)
		if cerr := store.Close(); err == nil {
			err = cerr
		}
	case errors.Is(err, errInUse):
		how = fmt.Sprintf("through the running server on port %d", cfg.Port)
		err = backupFromServer(cfg.Data, cfg.Port, dest)
	}
	if err != nil {
		return err
	}
	summary, err := checkBackup(dest)
	if err != nil {
		return fmt.Errorf("the copy at %s failed its check, do not rely on it: %w", dest, err)
	}
	fmt.Fprintf(stdout, "Backup written %s: %s\n%s\nChecked: it opens and is consistent.\n", how, dest, summary)
	return nil
}

// backupDest resolves PATH: a folder gets a dated file name; an existing
// file is replaced only with --force; the data file itself never.
func backupDest(path, data string, force bool) (string, error) {
	if fi, err := os.Stat(path); err == nil && fi.IsDir() {
		path = filepath.Join(path, "tagtally-backup-"+time.Now().Format("20060102-150405")+".db")
	} else if err == nil && !force {
		return "", fmt.Errorf("%w: %s exists; choose a new name or add --force to replace it", errUsage, path)
	}
	a, _ := filepath.Abs(path)
	b, _ := filepath.Abs(data)
	if a == b {
		return "", fmt.Errorf("%w: the backup cannot be the data file itself", errUsage)
	}
	return path, nil
}

// backupFromServer downloads GET /api/v1/backup from the server on this
// machine into dest, through a temporary file renamed when complete.
func backupFromServer(data string, port int, dest string) error {
	base := "http://127.0.0.1:" + strconv.Itoa(port)
	client := &http.Client{Timeout: 30 * time.Minute}
	if err := isTagtally(base); err != nil {
		return fmt.Errorf("%w, and no tagtally server answered at %s (%v). If the server runs on another port, pass the same --port here", errInUse, base, err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Minute)
	defer cancel()
	req, err := localRequest(data, http.MethodGet, base+"/api/v1/backup", nil)
	if err != nil {
		return err
	}
	req = req.WithContext(ctx)
	resp, err := client.Do(req)
	if err != nil {
		return fmt.Errorf("backup through the server: %w", err)
	}
	defer resp.Body.Close()
	if resp.StatusCode != http.StatusOK {
		msg, _ := io.ReadAll(io.LimitReader(resp.Body, 4096))
		return fmt.Errorf("backup through the server: %s: %s", resp.Status, msg)
	}
	return writeAtomically(dest, resp.Body, resp.ContentLength)
}

// isTagtally checks that what answers at base is a tagtally server.
func isTagtally(base string) error {
	client := &http.Client{Timeout: 3 * time.Second}
	resp, err := client.Get(base + "/healthz")
	if err != nil {
		return err
	}
	defer resp.Body.Close()
	var h struct{ Service string }
	if err := json.NewDecoder(io.LimitReader(resp.Body, 4096)).Decode(&h); err != nil || h.Service != "tagtally" {
		return fmt.Errorf("something else is listening there")
	}
	return nil
}

// writeAtomically copies r into a temporary file beside dest, syncs it and
// renames it to dest. want is the expected size, or -1 if unknown.
func writeAtomically(dest string, r io.Reader, want int64) error {
	return writeFileAtomically(dest, 0o600, func(w io.Writer) error {
		n, err := io.Copy(w, r)
		if err == nil && want >= 0 && n != want {
			err = fmt.Errorf("the copy stopped after %d of %d bytes", n, want)
		}
		return err
	})
}

// checkBackup opens the copy read-only, runs the consistency check and
// counts what it holds.
func checkBackup(path string) (string, error) {
	s, err := capture.Open(path, &capture.Options{ReadOnly: true, Timeout: time.Second})
	if err != nil {
		return "", err
	}
	defer s.Close()
	if err := s.Check(); err != nil {
		return "", err
	}
	studies, err := s.ListStudies()
	if err != nil {
		return "", err
	}
	records := 0
	for _, st := range studies {
		caps, err := s.Captures(st.ID, true)
		if err != nil {
			return "", err
		}
		records += len(caps)
	}
	fi, err := os.Stat(path)
	if err != nil {
		return "", err
	}
	return fmt.Sprintf("Studies: %d. Capture records: %d. Size: %.1f MB.", len(studies), records, float64(fi.Size())/1e6), nil
}
