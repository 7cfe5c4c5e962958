package main

import (
	"bytes"
	"context"
	"crypto/tls"
	"crypto/x509"
	"errors"
	"fmt"
	"io"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"tagtally/server/camptls"
)

// serveInProcess runs serve in this process until the test ends and returns
// what it printed so far once the plain port answers.
func serveInProcess(t *testing.T, cfg config) *bytes.Buffer {
	t.Helper()
	ctx, stop := context.WithCancel(context.Background())
	served := make(chan error, 1)
	out := &lockedBuffer{}
	go func() { served <- serve(ctx, cfg, false, out) }()
	t.Cleanup(func() {
		stop()
		if err := <-served; err != nil {
			t.Errorf("serve: %v", err)
		}
	})
	waitHealthy(t, fmt.Sprintf("http://127.0.0.1:%d", cfg.Port))
	return bytes.NewBufferString(out.String())
}

// clientTrusting makes an HTTPS client that trusts only the given
// authority, as a phone that installed the camp certificate does.
func clientTrusting(t *testing.T, caPEM []byte) *http.Client {
	t.Helper()
	roots := x509.NewCertPool()
	if !roots.AppendCertsFromPEM(caPEM) {
		t.Fatal("the authority file holds no certificate")
	}
	return &http.Client{Timeout: 10 * time.Second, Transport: &http.Transport{TLSClientConfig: &tls.Config{RootCAs: roots}}}
}

func get(t *testing.T, c *http.Client, url string) (int, string, http.Header) {
	t.Helper()
	res, err := c.Get(url)
	if err != nil {
		t.Fatalf("GET %s: %v", url, err)
	}
	defer res.Body.Close()
	b, _ := io.ReadAll(res.Body)
	return res.StatusCode, string(b), res.Header
}

var httpsAddr = regexp.MustCompile(`https://127\.0\.0\.1:(\d+)/`)

func TestServeHTTPSWithCampAuthority(t *testing.T) {
	dir := t.TempDir()
	cfg := config{Data: filepath.Join(dir, "camp.db"), Port: freePort(t), Host: "127.0.0.1", TLSPort: freePort(t), tlsPortSet: true}
	out := serveInProcess(t, cfg)
	caPEM, err := os.ReadFile(filepath.Join(dir, "camp-tls", "camp-ca.crt"))
	if err != nil {
		t.Fatalf("the camp authority must be kept beside the data file: %v", err)
	}
	if fi, err := os.Stat(filepath.Join(dir, "camp-tls", "camp-ca.key")); err != nil || fi.Mode().Perm()&0o077 != 0 {
		t.Errorf("the authority's key must be readable by its owner only: %v %v", fi.Mode(), err)
	}
	if !strings.Contains(out.String(), fmt.Sprintf("https://127.0.0.1:%d/", cfg.TLSPort)) || !strings.Contains(out.String(), "/setup") {
		t.Errorf("serve must print the HTTPS and setup addresses:\n%s", out)
	}

	phone := clientTrusting(t, caPEM)
	base := fmt.Sprintf("https://127.0.0.1:%d", cfg.TLSPort)
	if code, _, _ := get(t, phone, base+"/healthz"); code != 200 {
		t.Errorf("HTTPS health: %d", code)
	}
	if code, body, _ := get(t, phone, base+"/"); code != 200 || !strings.Contains(body, "<html") {
		t.Errorf("HTTPS app page: %d %.80q", code, body)
	}
	// A client that does not trust the camp authority is refused: the
	// certificate is really the authority's, not a self-signed leaf.
	if _, err := http.Get(base + "/healthz"); err == nil {
		t.Error("a client without the camp authority connected")
	}

	plain := fmt.Sprintf("http://127.0.0.1:%d", cfg.Port)
	if code, body, _ := get(t, http.DefaultClient, plain+camptls.SetupPath); code != 200 || !strings.Contains(body, "Download camp certificate") || !strings.Contains(body, base+"/") {
		t.Errorf("setup page: %d\n%s", code, body)
	}
	if code, body, _ := get(t, http.DefaultClient, plain+camptls.CAPath); code != 200 || body != string(caPEM) {
		t.Errorf("the setup page must offer exactly the stored authority: %d", code)
	}
	if code, body, h := get(t, http.DefaultClient, plain+camptls.QRPath); code != 200 || h.Get("Content-Type") != "image/png" || !strings.HasPrefix(body, "\x89PNG") {
		t.Errorf("QR code: %d %s", code, h.Get("Content-Type"))
	}
	// On this machine plain HTTP still serves the app (the coordinator's
	// browser on the laptop is a secure context over localhost).
	if code, body, _ := get(t, http.DefaultClient, plain+"/"); code != 200 || !strings.Contains(body, "<html") {
		t.Errorf("plain app page from this machine: %d", code)
	}
}

// A restart reuses the stored authority, so phones need not trust a new
// one; the certificate is not re-issued while it covers the addresses.
func TestServeKeepsTheAuthorityAcrossRestarts(t *testing.T) {
	dir := t.TempDir()
	caFile := filepath.Join(dir, "camp-tls", "camp-ca.crt")
	leafFile := filepath.Join(dir, "camp-tls", "server.crt")
	var first, firstLeaf []byte
	for i := 0; i < 2; i++ {
		cfg := config{Data: filepath.Join(dir, "camp.db"), Port: freePort(t), Host: "127.0.0.1", TLSPort: freePort(t), tlsPortSet: true}
		ctx, stop := context.WithCancel(context.Background())
		served := make(chan error, 1)
		go func() { served <- serve(ctx, cfg, false, io.Discard) }()
		waitHealthy(t, fmt.Sprintf("http://127.0.0.1:%d", cfg.Port))
		stop()
		if err := <-served; err != nil {
			t.Fatal(err)
		}
		ca, _ := os.ReadFile(caFile)
		leaf, _ := os.ReadFile(leafFile)
		if i == 0 {
			first, firstLeaf = ca, leaf
		} else if !bytes.Equal(ca, first) || !bytes.Equal(leaf, firstLeaf) {
			t.Error("a restart replaced the camp authority or a still-valid certificate")
		}
	}
}

func TestServeWithOwnCertificate(t *testing.T) {
	dir := t.TempDir()
	// The user's own certificate: here one issued by a throw-away
	// authority in another folder.
	own := filepath.Join(dir, "own")
	b, err := camptls.Ensure(own, []string{"127.0.0.1"}, time.Now())
	if err != nil {
		t.Fatal(err)
	}
	data := filepath.Join(dir, "field", "camp.db")
	cfg := config{Data: data, Port: freePort(t), Host: "127.0.0.1", TLSPort: freePort(t), tlsPortSet: true,
		TLSCert: filepath.Join(own, "server.crt"), TLSKey: filepath.Join(own, "server.key")}
	serveInProcess(t, cfg)
	if code, _, _ := get(t, clientTrusting(t, b.CAPEM), fmt.Sprintf("https://127.0.0.1:%d/healthz", cfg.TLSPort)); code != 200 {
		t.Errorf("HTTPS with the user's certificate: %d", code)
	}
	if _, err := os.Stat(filepath.Join(dir, "field", "camp-tls")); !errors.Is(err, os.ErrNotExist) {
		t.Error("with the user's own certificate no camp authority may be made")
	}
	plain := fmt.Sprintf("http://127.0.0.1:%d", cfg.Port)
	if code, _, _ := get(t, http.DefaultClient, plain+camptls.CAPath); code != 404 {
		t.Errorf("no authority to download with the user's certificate, got %d", code)
	}
	if code, body, _ := get(t, http.DefaultClient, plain+camptls.SetupPath); code != 200 || strings.Contains(body, "Download camp certificate") {
		t.Errorf("setup page with the user's certificate: %d", code)
	}
}

func TestServeNoTLS(t *testing.T) {
	dir := t.TempDir()
	cfg := config{Data: filepath.Join(dir, "camp.db"), Port: freePort(t), Host: "127.0.0.1", NoTLS: true}
	out := serveInProcess(t, cfg)
	if strings.Contains(out.String(), "https://") {
		t.Errorf("--no-tls printed an HTTPS address:\n%s", out)
	}
	if _, err := os.Stat(filepath.Join(dir, "camp-tls")); !errors.Is(err, os.ErrNotExist) {
		t.Error("--no-tls made a camp authority")
	}
}

// The default HTTPS port falls back to a free one when taken; a port the
// user chose must be free.
func TestServeTLSPortTaken(t *testing.T) {
	taken, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer taken.Close()
	busy := taken.Addr().(*net.TCPAddr).Port

	dir := t.TempDir()
	cfg := config{Data: filepath.Join(dir, "a.db"), Port: freePort(t), Host: "127.0.0.1", TLSPort: busy}
	out := serveInProcess(t, cfg)
	m := httpsAddr.FindStringSubmatch(out.String())
	if m == nil || m[1] == fmt.Sprint(busy) {
		t.Errorf("with the default port taken serve must use another and print it:\n%s", out)
	}

	cfg = config{Data: filepath.Join(dir, "b.db"), Port: freePort(t), Host: "127.0.0.1", TLSPort: busy, tlsPortSet: true}
	err = serve(context.Background(), cfg, false, io.Discard)
	if err == nil || !strings.Contains(err.Error(), "HTTPS port") {
		t.Errorf("a chosen HTTPS port that is taken: %v", err)
	}
}

func TestTLSFlagsValidate(t *testing.T) {
	dir := t.TempDir()
	d := filepath.Join(dir, "a.db")
	for _, tc := range []struct {
		cfg config
		ok  bool
	}{
		{config{Data: d, Port: 8080, TLSPort: 8443}, true},
		{config{Data: d, Port: 8080, TLSPort: 8080}, false},
		{config{Data: d, Port: 8080, TLSPort: 70000}, false},
		{config{Data: d, Port: 8080, TLSPort: 8443, TLSCert: "c.pem"}, false},
		{config{Data: d, Port: 8080, TLSPort: 8443, TLSKey: "k.pem"}, false},
		{config{Data: d, Port: 8080, NoTLS: true, TLSCert: "c.pem", TLSKey: "k.pem"}, false},
	} {
		if err := tc.cfg.validate(); (err == nil) != tc.ok {
			t.Errorf("%+v: validate() = %v", tc.cfg, err)
		}
	}
	t.Setenv(envTLS, "9443")
	cfg, err := defaultConfig()
	if err != nil || cfg.TLSPort != 9443 || !cfg.tlsPortSet {
		t.Errorf("%s: %+v %v", envTLS, cfg, err)
	}
}

// With --no-tls, join links must name an address phones reach, not the
// localhost of the coordinator's browser.
func TestPlainPhoneAddress(t *testing.T) {
	for _, tc := range []struct {
		host string
		lan  []string
		want string
	}{
		{"", []string{"192.0.2.10", "fd00::2"}, "http://192.0.2.10:8080"},
		{"0.0.0.0", []string{"192.0.2.10"}, "http://192.0.2.10:8080"},
		{"198.51.100.4", []string{"192.0.2.10"}, "http://198.51.100.4:8080"},
		{"", []string{"fd00::2"}, "http://[fd00::2]:8080"},
		{"", nil, ""},
	} {
		if got := plainPhoneAddress(tc.host, 8080, tc.lan); got != tc.want {
			t.Errorf("plainPhoneAddress(%q, 8080, %v) = %q, want %q", tc.host, tc.lan, got, tc.want)
		}
	}
}
