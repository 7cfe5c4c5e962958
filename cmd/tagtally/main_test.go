package main

import (
	"bytes"
	"context"
	"errors"
	"flag"
	"fmt"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"tagtally/capture"
	"tagtally/demo"
)

// TestHelpExplainsEveryOption runs every subcommand with --help and checks
// that it prints a usage line, a description and a sentence for each flag.
func TestHelpExplainsEveryOption(t *testing.T) {
	var top bytes.Buffer
	printHelp(&top)
	for _, c := range commands {
		if !strings.Contains(top.String(), c.name) {
			t.Errorf("tagtally help does not list %q", c.name)
		}
		var out bytes.Buffer
		err := c.run([]string{"--help"}, &out)
		if !errors.Is(err, flag.ErrHelp) {
			t.Errorf("%s --help returned %v, want flag.ErrHelp", c.name, err)
		}
		help := out.String()
		if c.name == "serve" || c.name == "demo" || c.name == "backup" {
			if !strings.Contains(help, "Usage: tagtally "+c.name) {
				t.Errorf("%s --help has no usage line:\n%s", c.name, help)
			}
			for _, f := range []string{"-data"} {
				if !strings.Contains(help, f) {
					t.Errorf("%s --help does not explain %s", c.name, f)
				}
			}
		}
	}
}

func TestConfigFlagsOverEnvironment(t *testing.T) {
	t.Setenv(envPort, "9123")
	t.Setenv(envData, "/srv/camp/from-env.db")
	cfg, err := defaultConfig()
	if err != nil || cfg.Port != 9123 || cfg.Data != "/srv/camp/from-env.db" {
		t.Fatalf("from environment: %+v, %v", cfg, err)
	}
	fs := flag.NewFlagSet("x", flag.ContinueOnError)
	cfg.addDataFlag(fs)
	cfg.addPortFlag(fs, "port")
	if err := fs.Parse([]string{"--port", "8181"}); err != nil {
		t.Fatal(err)
	}
	if cfg.Port != 8181 || cfg.Data != "/srv/camp/from-env.db" {
		t.Errorf("a flag should win over the environment and leave the rest: %+v", cfg)
	}

	t.Setenv(envPort, "eighty")
	if _, err := defaultConfig(); !errors.Is(err, errUsage) {
		t.Errorf("a bad %s gave %v, want a usage error", envPort, err)
	}
}

func TestConfigValidate(t *testing.T) {
	dir := t.TempDir()
	for _, tc := range []struct {
		cfg config
		ok  bool
	}{
		{config{Data: filepath.Join(dir, "a.db"), Port: 8080}, true},
		{config{Data: filepath.Join(dir, "a.db"), Port: 0, Host: "127.0.0.1"}, true},
		{config{Data: "", Port: 8080}, false},
		{config{Data: dir, Port: 8080}, false}, // a folder, not a file
		{config{Data: filepath.Join(dir, "a.db"), Port: 70000}, false},
		{config{Data: filepath.Join(dir, "a.db"), Port: 8080, Host: "camp-laptop"}, false},
	} {
		if err := tc.cfg.validate(); (err == nil) != tc.ok {
			t.Errorf("%+v: validate() = %v", tc.cfg, err)
		}
	}
}

func TestDemoCommandIsIdempotent(t *testing.T) {
	data := filepath.Join(t.TempDir(), "sub", "camp.db")
	var out bytes.Buffer
	if err := runDemo([]string{"--data", data}, &out); err != nil {
		t.Fatal(err)
	}
	_, caps := demo.Build()
	if !strings.Contains(out.String(), fmt.Sprintf("%d records added", len(caps))) {
		t.Errorf("first run said:\n%s", out.String())
	}
	out.Reset()
	if err := runDemo([]string{"--data", data}, &out); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(out.String(), "already loaded") {
		t.Errorf("second run said:\n%s", out.String())
	}
	if err := runDemo([]string{"--data", data, "extra"}, &out); !errors.Is(err, errUsage) {
		t.Errorf("a stray argument gave %v, want a usage error", err)
	}
}

// countRecords opens a data file read-only and counts its capture records.
func countRecords(t *testing.T, path string) int {
	t.Helper()
	s, err := capture.Open(path, &capture.Options{ReadOnly: true, Timeout: time.Second})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	all, err := s.Captures(demo.StudyID, true)
	if err != nil {
		t.Fatal(err)
	}
	return len(all)
}

func TestBackupOfAClosedFile(t *testing.T) {
	dir := t.TempDir()
	data := filepath.Join(dir, "camp.db")
	if err := runDemo([]string{"--data", data}, new(bytes.Buffer)); err != nil {
		t.Fatal(err)
	}
	dest := filepath.Join(dir, "copy.db")
	var out bytes.Buffer
	if err := runBackup([]string{"--data", data, dest}, &out); err != nil {
		t.Fatal(err)
	}
	_, caps := demo.Build()
	if n := countRecords(t, dest); n != len(caps) {
		t.Errorf("backup holds %d records, want %d", n, len(caps))
	}
	if !strings.Contains(out.String(), "from the data file") || !strings.Contains(out.String(), "Checked") {
		t.Errorf("backup said:\n%s", out.String())
	}
	// An existing file is not replaced without --force; a folder gets a
	// dated file; the data file itself is never the target.
	if err := runBackup([]string{"--data", data, dest}, &out); !errors.Is(err, errUsage) {
		t.Errorf("backup over an existing file: %v, want a usage error", err)
	}
	if err := runBackup([]string{"--data", data, "--force", dest}, &out); err != nil {
		t.Errorf("backup with --force: %v", err)
	}
	usb := filepath.Join(dir, "usb")
	os.Mkdir(usb, 0o700)
	if err := runBackup([]string{"--data", data, usb}, &out); err != nil {
		t.Fatal(err)
	}
	if m, _ := filepath.Glob(filepath.Join(usb, "tagtally-backup-*.db")); len(m) != 1 {
		t.Errorf("backup into a folder made %v", m)
	}
	if err := runBackup([]string{"--data", data, "--force", data}, &out); !errors.Is(err, errUsage) {
		t.Errorf("backup onto the data file: %v, want a usage error", err)
	}
	if err := runBackup([]string{"--data", filepath.Join(dir, "none.db"), filepath.Join(dir, "x.db")}, &out); err == nil {
		t.Error("backup of a missing data file succeeded")
	}
}

// freePort asks the system for a free loopback port.
func freePort(t *testing.T) int {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	return ln.Addr().(*net.TCPAddr).Port
}

func waitHealthy(t *testing.T, base string) {
	t.Helper()
	for deadline := time.Now().Add(20 * time.Second); time.Now().Before(deadline); time.Sleep(20 * time.Millisecond) {
		if resp, err := http.Get(base + "/healthz"); err == nil {
			resp.Body.Close()
			if resp.StatusCode == 200 {
				return
			}
		}
	}
	t.Fatalf("no server answered at %s", base)
}

// TestBackupWhileServing runs the server in this process (it holds the
// data file's lock) and backs up through it.
func TestBackupWhileServing(t *testing.T) {
	dir := t.TempDir()
	data := filepath.Join(dir, "camp.db")
	cfg := config{Data: data, Port: freePort(t), Host: "127.0.0.1"}
	ctx, stop := context.WithCancel(context.Background())
	served := make(chan error, 1)
	var serveOut bytes.Buffer
	go func() { served <- serve(ctx, cfg, true, &serveOut) }()
	defer func() {
		stop()
		if err := <-served; err != nil {
			t.Errorf("serve: %v", err)
		}
	}()
	waitHealthy(t, fmt.Sprintf("http://127.0.0.1:%d", cfg.Port))

	var out bytes.Buffer
	dest := filepath.Join(dir, "copy.db")
	port := fmt.Sprint(cfg.Port)
	if err := runBackup([]string{"--data", data, "--port", port, dest}, &out); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(out.String(), "through the running server") {
		t.Errorf("backup said:\n%s", out.String())
	}
	_, caps := demo.Build()
	if n := countRecords(t, dest); n != len(caps) {
		t.Errorf("backup holds %d records, want %d", n, len(caps))
	}
	// With the wrong port the file is locked and nobody answers: a clear
	// error, no file.
	other := filepath.Join(dir, "other.db")
	err := runBackup([]string{"--data", data, "--port", fmt.Sprint(freePort(t)), other}, &out)
	if !errors.Is(err, errInUse) || !strings.Contains(err.Error(), "no tagtally server answered") {
		t.Errorf("backup with the wrong port: %v", err)
	}
	if _, err := os.Stat(other); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("a failed backup left %s behind", other)
	}
	if !strings.Contains(serveOut.String(), "http://127.0.0.1:"+port+"/") {
		t.Errorf("serve did not print its address:\n%s", serveOut.String())
	}
}
