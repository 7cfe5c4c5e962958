package main

import (
	"fmt"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"syscall"
	"testing"
	"time"

	"tagtally/capture/storetest"
)

var claimLink = regexp.MustCompile(`http://localhost:\d+/coord/#claim=([A-Za-z0-9_-]{43})`)

// claimStatus exchanges a claim code at base and returns the status.
func claimStatus(t *testing.T, base, code string) int {
	t.Helper()
	req, _ := http.NewRequest("POST", base+"/api/v1/access/claim", strings.NewReader(`{"code":"`+code+`"}`))
	req.Header.Set("Content-Type", "application/json")
	resp, err := (&http.Client{Transport: http.DefaultTransport.(tokenTransport).base}).Do(req)
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	return resp.StatusCode
}

func runTagtally(t *testing.T, bin string, args ...string) (string, error) {
	t.Helper()
	out, err := exec.Command(bin, args...).CombinedOutput()
	return string(out), err
}

// TestServeAccessEndToEnd: serve prints a one-time coordinator link and
// keeps a local token (mode 0600) beside the data file; tagtally access
// makes a new link (the old one stops working), a peer token that syncs
// but is cut off by revoke at once; at a clean stop the local token file
// goes and its token is revoked.
func TestServeAccessEndToEnd(t *testing.T) {
	bin := buildBinary(t)
	data := filepath.Join(t.TempDir(), "camp.db")
	port := freePort(t)
	base := fmt.Sprintf("http://127.0.0.1:%d", port)
	cmd, out := startServeProcess(t, bin, data, port, nil, "--no-tls")
	var first string
	for deadline := time.Now().Add(10 * time.Second); first == "" && time.Now().Before(deadline); time.Sleep(20 * time.Millisecond) {
		if m := claimLink.FindStringSubmatch(out.String()); m != nil {
			first = m[1]
		}
	}
	if first == "" {
		t.Fatalf("serve printed no coordinator link:\n%s", out)
	}
	if fi, err := os.Stat(localTokenPath(data)); err != nil || fi.Mode().Perm() != 0o600 {
		t.Fatalf("local token file: %v %v, want mode 0600", fi, err)
	}
	// Without a token the API refuses; the local token is a coordinator.
	if resp, err := (&http.Client{}).Do(mustRequest(t, "GET", base+"/api/v1/studies")); err != nil || resp.StatusCode != 200 {
		t.Fatalf("studies with the local token: %v %v", resp, err)
	}
	createStudy(t, base)

	// A new link cancels the first, unused one.
	linkOut, err := runTagtally(t, bin, "access", "link", "--data", data, "--port", fmt.Sprint(port))
	m := regexp.MustCompile(`/coord/#claim=([A-Za-z0-9_-]{43})`).FindStringSubmatch(linkOut)
	if err != nil || m == nil {
		t.Fatalf("access link: %v\n%s", err, linkOut)
	}
	if code := claimStatus(t, base, first); code != 401 {
		t.Errorf("the start link after a new one = %d, want 401", code)
	}
	if code := claimStatus(t, base, m[1]); code != 200 {
		t.Errorf("the new link = %d, want 200", code)
	}

	// A peer token made on the command line syncs; revoked, it is refused.
	tokOut, err := runTagtally(t, bin, "access", "token", "--kind", "peer", "--study", storetest.Study().ID, "--label", "program office", "--data", data, "--port", fmt.Sprint(port))
	lines := strings.Split(strings.TrimSpace(tokOut), "\n")
	peer := lines[len(lines)-1]
	if err != nil || len(peer) != 43 {
		t.Fatalf("access token: %v\n%s", err, tokOut)
	}
	pull := func() int {
		req := mustRequest(t, "GET", base+"/api/v1/sync/pull")
		req.Header.Set("Authorization", "Bearer "+peer)
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		return resp.StatusCode
	}
	if code := pull(); code != 200 {
		t.Fatalf("pull with the peer token = %d", code)
	}
	listOut, err := runTagtally(t, bin, "access", "list", "--data", data, "--port", fmt.Sprint(port))
	id := regexp.MustCompile(`(?m)^([0-9a-f]{16})\s+peer\s+peer\s+` + storetest.Study().ID + `\s+program office`).FindStringSubmatch(listOut)
	if err != nil || id == nil {
		t.Fatalf("access list: %v\n%s", err, listOut)
	}
	if o, err := runTagtally(t, bin, "access", "revoke", id[1], "--data", data, "--port", fmt.Sprint(port)); err != nil {
		t.Fatalf("access revoke: %v\n%s", err, o)
	}
	if code := pull(); code != 401 {
		t.Errorf("pull after revoke = %d, want 401", code)
	}

	// Clean stop: the local token file is removed and its token revoked.
	cmd.Process.Signal(syscall.SIGTERM)
	if err := cmd.Wait(); err != nil {
		t.Fatalf("serve: %v\n%s", err, out)
	}
	if _, err := os.Stat(localTokenPath(data)); !os.IsNotExist(err) {
		t.Errorf("local token file still there after the stop: %v", err)
	}
	listOut, err = runTagtally(t, bin, "access", "list", "--data", data)
	if err != nil || !regexp.MustCompile(`(?m)local\s+coordinator\s+all\s+tagtally commands on this computer\s+\S+ \S+\s+\d{4}-`).MatchString(listOut) {
		t.Errorf("after the stop the local token should be listed as revoked: %v\n%s", err, listOut)
	}
	if o, err := runTagtally(t, bin, "access", "link", "--data", data, "--port", fmt.Sprint(port)); err == nil || !strings.Contains(o, "start tagtally serve") {
		t.Errorf("access link with no server = %v\n%s", err, o)
	}
	if o, err := runTagtally(t, bin, "access", "token", "--kind", "device", "--data", data); err == nil || !strings.Contains(o, "join code") {
		t.Errorf("access token --kind device = %v\n%s", err, o)
	}
}

func mustRequest(t *testing.T, method, u string) *http.Request {
	t.Helper()
	req, err := http.NewRequest(method, u, nil)
	if err != nil {
		t.Fatal(err)
	}
	return req
}
