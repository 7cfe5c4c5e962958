package camptls

import (
	"crypto/tls"
	"crypto/x509"
	"io"
	"net"
	"net/http"
	"net/http/httptest"
	"strings"
	"testing"
	"time"
)

// The requirements checked here are those phones publish for trusted
// server certificates (common practice): a SAN for every address, the
// server-auth extended key usage, SHA-256 signatures, and a leaf lifetime
// of at most 825 days (398 for publicly trusted ones).
func TestEnsureMakesPhoneAcceptableCertificates(t *testing.T) {
	dir := t.TempDir()
	now := time.Date(2026, 6, 1, 12, 0, 0, 0, time.UTC)
	hosts := []string{"localhost", "127.0.0.1", "192.168.4.10", "camp-laptop"}
	b, err := Ensure(dir, hosts, now)
	if err != nil {
		t.Fatal(err)
	}
	if !b.Renewed {
		t.Error("first Ensure should issue a certificate")
	}
	leaf := b.Leaf.Leaf
	if leaf == nil {
		t.Fatal("no parsed leaf")
	}
	if got := leaf.NotAfter.Sub(leaf.NotBefore); got > 825*24*time.Hour || got > 398*24*time.Hour {
		t.Errorf("leaf lifetime %v exceeds phone limits", got)
	}
	if leaf.SignatureAlgorithm != x509.ECDSAWithSHA256 {
		t.Errorf("signature algorithm %v, want ECDSA with SHA-256", leaf.SignatureAlgorithm)
	}
	if len(leaf.ExtKeyUsage) != 1 || leaf.ExtKeyUsage[0] != x509.ExtKeyUsageServerAuth {
		t.Errorf("extended key usage %v, want server auth only", leaf.ExtKeyUsage)
	}
	if leaf.IsCA {
		t.Error("leaf must not be a CA")
	}
	roots := x509.NewCertPool()
	roots.AddCert(b.CA)
	for _, h := range hosts {
		if _, err := leaf.Verify(x509.VerifyOptions{DNSName: h, Roots: roots, CurrentTime: now}); err != nil {
			t.Errorf("leaf does not verify for %s: %v", h, err)
		}
	}
	// A second call with the same hosts keeps the certificate.
	b2, err := Ensure(dir, hosts, now.Add(24*time.Hour))
	if err != nil {
		t.Fatal(err)
	}
	if b2.Renewed || !b2.Leaf.Leaf.Equal(leaf) {
		t.Error("certificate renewed without cause")
	}
	// A new address renews it from the same authority.
	b3, err := Ensure(dir, append(hosts, "10.0.0.7"), now.Add(48*time.Hour))
	if err != nil {
		t.Fatal(err)
	}
	if !b3.Renewed || !b3.CA.Equal(b.CA) {
		t.Error("new address should renew the leaf from the same authority")
	}
	// Nearing expiry renews it.
	b4, err := Ensure(dir, append(hosts, "10.0.0.7"), now.Add(LeafLifetime-10*24*time.Hour))
	if err != nil {
		t.Fatal(err)
	}
	if !b4.Renewed {
		t.Error("a certificate 10 days from expiry should be renewed")
	}
}

func TestServesHTTPSWithTheCertificate(t *testing.T) {
	b, err := Ensure(t.TempDir(), []string{"127.0.0.1"}, time.Now())
	if err != nil {
		t.Fatal(err)
	}
	srv := httptest.NewUnstartedServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) { io.WriteString(w, "ok") }))
	srv.TLS = &tls.Config{Certificates: []tls.Certificate{b.Leaf}}
	srv.StartTLS()
	defer srv.Close()
	roots := x509.NewCertPool()
	roots.AddCert(b.CA)
	client := &http.Client{Transport: &http.Transport{TLSClientConfig: &tls.Config{RootCAs: roots}}}
	res, err := client.Get(srv.URL)
	if err != nil {
		t.Fatalf("a client trusting only the camp authority must connect: %v", err)
	}
	res.Body.Close()
}

func TestSetupPage(t *testing.T) {
	s := &Setup{CAPEM: []byte("-----BEGIN CERTIFICATE-----\nx\n-----END CERTIFICATE-----\n"), Addresses: []string{"https://192.168.4.10:8443"}}
	get := func(path string) *httptest.ResponseRecorder {
		rec := httptest.NewRecorder()
		s.ServeHTTP(rec, httptest.NewRequest("GET", path, nil))
		return rec
	}
	page := get(SetupPath)
	if page.Code != 200 || !strings.Contains(page.Body.String(), "https://192.168.4.10:8443") || !strings.Contains(page.Body.String(), "Android") {
		t.Errorf("setup page: %d %s", page.Code, page.Body.String())
	}
	if strings.Contains(page.Body.String(), "<script") {
		t.Error("setup page must not carry script")
	}
	for h, want := range map[string]string{"X-Frame-Options": "DENY", "Referrer-Policy": "no-referrer", "X-Content-Type-Options": "nosniff"} {
		if got := page.Header().Get(h); got != want {
			t.Errorf("setup page header %s = %q, want %q", h, got, want)
		}
	}
	if csp := page.Header().Get("Content-Security-Policy"); !strings.Contains(csp, "frame-ancestors 'none'") || strings.Contains(csp, "unsafe-inline") {
		t.Errorf("setup page CSP %q", csp)
	}
	ca := get(CAPath)
	if ca.Header().Get("Content-Type") != "application/x-x509-ca-cert" || !strings.Contains(ca.Body.String(), "BEGIN CERTIFICATE") {
		t.Errorf("certificate download: %v", ca.Header())
	}
	qr := get(QRPath)
	if qr.Code != 200 || !strings.HasPrefix(qr.Body.String(), "\x89PNG") {
		t.Errorf("QR code: %d", qr.Code)
	}
	if get("/setup/../etc/passwd").Code != 404 {
		t.Error("unknown paths must 404")
	}
}

func TestLANHostsIncludesLoopback(t *testing.T) {
	hs := LANHosts()
	for _, want := range []string{"localhost", "127.0.0.1"} {
		found := false
		for _, h := range hs {
			found = found || h == want
		}
		if !found {
			t.Errorf("LANHosts lacks %s: %v", want, hs)
		}
	}
	for _, a := range LANAddresses() {
		if net.ParseIP(a) == nil {
			t.Errorf("LANAddresses gave %q, not an IP", a)
		}
	}
}
