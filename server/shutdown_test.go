package server

import (
	"bufio"
	"context"
	"fmt"
	"io"
	"log/slog"
	"net"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"tagtally/capture"
	"tagtally/capture/storetest"
	"tagtally/server/access"
)

// TestShutdownFinishesInFlightWrite starts a capture upload, begins a
// graceful shutdown while the body is still arriving, then sends the rest:
// the write must be acknowledged, stored, and Serve must return cleanly.
func TestShutdownFinishesInFlightWrite(t *testing.T) {
	store := storetest.Open(t)
	st := storetest.Study()
	if err := store.CreateStudy(st); err != nil {
		t.Fatal(err)
	}
	cfg := DefaultConfig()
	cfg.Addr = "127.0.0.1:0"
	cfg.Logger = slog.New(slog.NewTextHandler(io.Discard, nil))
	srv, err := New(store, cfg)
	if err != nil {
		t.Fatal(err)
	}
	secret, _ := issue(t, srv, access.NewToken{Kind: access.KindCoordinator, Label: "test"})
	ln, err := net.Listen("tcp", cfg.Addr)
	if err != nil {
		t.Fatal(err)
	}
	addr := ln.Addr().String()
	ctx, stop := context.WithCancel(context.Background())
	defer stop()
	served := make(chan error, 1)
	go func() { served <- srv.Serve(ctx, ln) }()

	conn, err := net.Dial("tcp", addr)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	// Expect: 100-continue makes the server say when the handler has
	// started reading the body, so the request is surely in flight (not
	// still waiting in the listener's queue) when the shutdown begins.
	body := validCapture
	half := len(body) / 2
	fmt.Fprintf(conn, "POST /api/v1/studies/%s/captures HTTP/1.1\r\nHost: %s\r\nAuthorization: Bearer %s\r\nContent-Type: application/json\r\nContent-Length: %d\r\nExpect: 100-continue\r\n\r\n",
		st.ID, addr, secret, len(body))
	br := bufio.NewReader(conn)
	if resp, err := http.ReadResponse(br, nil); err != nil || resp.StatusCode != http.StatusContinue {
		t.Fatalf("expected 100 Continue, got %v, %v", resp, err)
	}
	io.WriteString(conn, body[:half])

	stop() // SIGINT or SIGTERM in `tagtally serve`
	// Wait until the listener is closed: the shutdown is under way.
	for deadline := time.Now().Add(10 * time.Second); ; {
		c, err := net.DialTimeout("tcp", addr, time.Second)
		if err != nil {
			break
		}
		c.Close()
		if time.Now().After(deadline) {
			t.Fatal("the listener is still open 10 s after shutdown began")
		}
		time.Sleep(10 * time.Millisecond)
	}
	select {
	case err := <-served:
		t.Fatalf("Serve returned (%v) with a request still in flight", err)
	default:
	}

	io.WriteString(conn, body[half:])
	resp, err := http.ReadResponse(br, nil)
	if err != nil {
		t.Fatalf("no answer to the in-flight write: %v", err)
	}
	raw, _ := io.ReadAll(resp.Body)
	resp.Body.Close()
	if resp.StatusCode != http.StatusCreated {
		t.Fatalf("in-flight write = %d %s, want 201", resp.StatusCode, raw)
	}
	if err := <-served; err != nil {
		t.Fatalf("Serve after shutdown: %v", err)
	}
	all, err := store.Captures(st.ID, false)
	if err != nil || len(all) != 1 || all[0].TagID != "BF-0001" {
		t.Fatalf("store after shutdown holds %d records (%v), want the one written", len(all), err)
	}
}

// TestBackupDownload takes a backup through the API while the server runs
// and opens it as a data file.
func TestBackupDownload(t *testing.T) {
	ts := newTestServer(t, nil)
	if a := ts.do(t, "POST", "/api/v1/studies/"+ts.study.ID+"/captures", validCapture); a.status != 201 {
		t.Fatalf("create = %d", a.status)
	}
	a := ts.do(t, "GET", "/api/v1/backup", "")
	if a.status != 200 || !strings.HasPrefix(a.header.Get("Content-Disposition"), "attachment") {
		t.Fatalf("backup = %d %v", a.status, a.header)
	}
	path := filepath.Join(t.TempDir(), "copy.db")
	if err := writeFile(path, a.raw); err != nil {
		t.Fatal(err)
	}
	copyStore, err := capture.Open(path, nil)
	if err != nil {
		t.Fatalf("the backup does not open as a data file: %v", err)
	}
	defer copyStore.Close()
	if err := copyStore.Check(); err != nil {
		t.Errorf("backup fails the consistency check: %v", err)
	}
	got, err := copyStore.Captures(ts.study.ID, true)
	if err != nil || len(got) != 1 {
		t.Errorf("backup holds %d records (%v), want 1", len(got), err)
	}

	// From another machine the backup is refused.
	srv, err := New(ts.store, DefaultConfig())
	if err != nil {
		t.Fatal(err)
	}
	req := httptest.NewRequest("GET", "/api/v1/backup", nil)
	req.RemoteAddr = "192.0.2.7:50000"
	rec := httptest.NewRecorder()
	srv.Handler().ServeHTTP(rec, req)
	if rec.Code != http.StatusForbidden || rec.Body.Len() > 1000 {
		t.Errorf("backup from another machine = %d (%d bytes), want 403", rec.Code, rec.Body.Len())
	}
}

func writeFile(path string, b []byte) error { return os.WriteFile(path, b, 0o600) }
