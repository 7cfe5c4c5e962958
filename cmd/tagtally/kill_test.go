package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"github.com/google/uuid"

	"tagtally/capture/storetest"
)

// buildBinary compiles tagtally into a temporary folder.
func buildBinary(t *testing.T) string {
	t.Helper()
	bin := filepath.Join(t.TempDir(), "tagtally")
	cmd := exec.Command("go", "build", "-o", bin, ".")
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("go build: %v\n%s", err, out)
	}
	return bin
}

// startServe starts `tagtally serve` on a loopback port and waits until it
// answers.
func startServe(t *testing.T, bin, data string, port int) (*exec.Cmd, *lockedBuffer) {
	t.Helper()
	return startServeProcess(t, bin, data, port, nil)
}

// startServeProcess starts `tagtally serve` for data on a loopback port,
// with extra environment variables and options; it waits until the server
// answers, remembers its local coordinator token (written anew at each
// start) and kills it at the end of the test if it still runs. Every test
// that runs the real server starts it here.
func startServeProcess(t *testing.T, bin, data string, port int, env []string, args ...string) (*exec.Cmd, *lockedBuffer) {
	t.Helper()
	out := new(lockedBuffer)
	cmd := exec.Command(bin, append([]string{"serve", "--data", data, "--host", "127.0.0.1", "--port", fmt.Sprint(port)}, args...)...)
	cmd.Env = append(os.Environ(), env...)
	cmd.Stdout, cmd.Stderr = out, out
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		if cmd.ProcessState == nil {
			cmd.Process.Kill()
			cmd.Wait()
		}
	})
	base := fmt.Sprintf("http://127.0.0.1:%d", port)
	waitHealthy(t, base)
	rememberToken(t, base, data)
	return cmd, out
}

// TestKilledServerKeepsAcknowledgedWrites sends a stream of captures from
// several clients, kills the server with SIGKILL in the middle of it,
// restarts it on the same data file and checks that every write that got a
// 2xx answer is there. Writes that got no answer may or may not be; none
// may be half-stored (the store's consistency check runs on the file).
func TestKilledServerKeepsAcknowledgedWrites(t *testing.T) {
	bin := buildBinary(t)
	data := filepath.Join(t.TempDir(), "camp.db")
	port := freePort(t)
	base := fmt.Sprintf("http://127.0.0.1:%d", port)
	srv, _ := startServe(t, bin, data, port)

	st := storetest.Study()
	body, _ := json.Marshal(st)
	resp, err := http.Post(base+"/api/v1/studies", "application/json", bytes.NewReader(body))
	if err != nil || resp.StatusCode != http.StatusCreated {
		t.Fatalf("create study: %v %v", resp, err)
	}
	resp.Body.Close()

	const clients, killAfter = 4, 120
	var (
		mu    sync.Mutex
		acked []string
		wg    sync.WaitGroup
	)
	killed := make(chan struct{})
	var once sync.Once
	client := &http.Client{Timeout: 10 * time.Second}
	for w := 0; w < clients; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			for i := 0; ; i++ {
				id := uuid.Must(uuid.NewV7()).String()
				rec := fmt.Sprintf(`{"id":%q,"tag_id":"BF-%d%03d","event":"new","species":"bank vole","station_id":"A1","captured_at":"2025-06-02T22:10:00Z"}`, id, w, i%1000)
				resp, err := client.Post(base+"/api/v1/studies/"+st.ID+"/captures", "application/json", strings.NewReader(rec))
				if err != nil {
					return // the server is gone
				}
				resp.Body.Close()
				if resp.StatusCode/100 != 2 {
					t.Errorf("client %d: write %d got %s", w, i, resp.Status)
					return
				}
				mu.Lock()
				acked = append(acked, id)
				n := len(acked)
				mu.Unlock()
				if n >= killAfter {
					once.Do(func() {
						srv.Process.Signal(syscall.SIGKILL)
						close(killed)
					})
				}
			}
		}(w)
	}
	select {
	case <-killed:
	case <-time.After(2 * time.Minute):
		t.Fatal("the clients did not reach the kill point")
	}
	wg.Wait()
	srv.Wait()
	if ws, ok := srv.ProcessState.Sys().(syscall.WaitStatus); !ok || ws.Signal() != syscall.SIGKILL {
		t.Fatalf("the server was not killed by SIGKILL: %v", srv.ProcessState)
	}

	// Restart on the same file: every acknowledged write must be there.
	srv2, out2 := startServe(t, bin, data, port)
	for _, id := range acked {
		resp, err := http.Get(base + "/api/v1/studies/" + st.ID + "/captures/" + id)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		if resp.StatusCode != http.StatusOK {
			t.Errorf("acknowledged capture %s: %s after the restart", id, resp.Status)
		}
	}
	t.Logf("%d acknowledged writes before SIGKILL, all checked after restart", len(acked))

	// A graceful stop (SIGTERM) exits 0 and says so; then the file passes
	// the consistency check.
	srv2.Process.Signal(syscall.SIGTERM)
	if err := srv2.Wait(); err != nil {
		t.Fatalf("serve after SIGTERM: %v\n%s", err, out2)
	}
	if !strings.Contains(out2.String(), "Stopped") {
		t.Errorf("serve did not report a clean stop:\n%s", out2)
	}
	if err := checkFile(data); err != nil {
		t.Errorf("data file after kill and restart: %v", err)
	}
}

func checkFile(path string) error {
	if _, err := os.Stat(path); err != nil {
		return err
	}
	_, err := checkBackup(path)
	return err
}
