package camptls

import (
	"crypto/x509"
	"net"
	"net/http"
	"net/http/httptest"
	"slices"
	"testing"
	"time"
)

// When the laptop joins another network the running server must present
// a certificate naming the new address, signed by the same authority, so
// phones keep trusting it without a restart.
func TestManagerRenewsOnAddressChange(t *testing.T) {
	m, err := NewManager(t.TempDir(), "", 8443, nil)
	if err != nil {
		t.Fatal(err)
	}
	addrs := []string{"192.0.2.10"}
	m.hosts = func() []string { return append([]string{"localhost", "127.0.0.1"}, addrs...) }
	m.addrs = func() []string { return addrs }
	if err := m.Refresh(time.Now()); err != nil {
		t.Fatal(err)
	}
	get := m.TLSConfig().GetCertificate
	before, _ := get(nil)
	ca := m.CAPEM()
	if !slices.ContainsFunc(before.Leaf.IPAddresses, net.ParseIP("192.0.2.10").Equal) {
		t.Fatalf("certificate lacks the address: %v", before.Leaf.IPAddresses)
	}

	addrs = []string{"198.51.100.7"}
	if err := m.Refresh(time.Now()); err != nil {
		t.Fatal(err)
	}
	after, _ := get(nil)
	if after == before || !slices.ContainsFunc(after.Leaf.IPAddresses, net.ParseIP("198.51.100.7").Equal) {
		t.Fatalf("no new certificate for the new address: %v", after.Leaf.IPAddresses)
	}
	if string(m.CAPEM()) != string(ca) {
		t.Error("renewal replaced the authority; phones would have to trust it again")
	}
	roots := x509.NewCertPool()
	roots.AppendCertsFromPEM(ca)
	if _, err := after.Leaf.Verify(x509.VerifyOptions{Roots: roots, DNSName: "198.51.100.7", KeyUsages: []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth}}); err != nil {
		t.Errorf("renewed certificate does not verify for the new address: %v", err)
	}
	if got := m.Addresses(); len(got) != 1 || got[0] != "https://198.51.100.7:8443/" {
		t.Errorf("setup page addresses: %v", got)
	}
	// Unchanged addresses: the same certificate is kept.
	if err := m.Refresh(time.Now()); err != nil {
		t.Fatal(err)
	}
	if again, _ := get(nil); again.Leaf.SerialNumber.Cmp(after.Leaf.SerialNumber) != 0 {
		t.Error("a refresh with unchanged addresses issued a new certificate")
	}
	// Near expiry: renewed.
	if err := m.Refresh(after.Leaf.NotAfter.Add(-RenewBefore / 2)); err != nil {
		t.Fatal(err)
	}
	if late, _ := get(nil); late.Leaf.SerialNumber.Cmp(after.Leaf.SerialNumber) == 0 {
		t.Error("a certificate near expiry was not renewed")
	}
}

func TestPlainHTTPRouting(t *testing.T) {
	app := http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) { w.Write([]byte("app")) })
	setup := http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) { w.Write([]byte("setup")) })
	h := PlainHTTP(app, setup)
	for _, tc := range []struct {
		remote, path string
		code         int
		body, where  string
	}{
		{"192.0.2.20:5000", "/", http.StatusSeeOther, "", SetupPath}, // a phone on the Wi-Fi
		{"192.0.2.20:5000", "/index.html", http.StatusSeeOther, "", SetupPath},
		{"192.0.2.20:5000", "/setup", 200, "setup", ""},
		{"192.0.2.20:5000", "/setup/camp-ca.crt", 200, "setup", ""},
		{"192.0.2.20:5000", "/api/v1/studies", 200, "app", ""}, // scripts and peers keep working
		{"127.0.0.1:5000", "/", 200, "app", ""},                // the laptop itself
		{"[::1]:5000", "/", 200, "app", ""},
		{"192.0.2.20:5000", "/setupx", 200, "app", ""},
	} {
		r := httptest.NewRequest("GET", tc.path, nil)
		r.RemoteAddr = tc.remote
		w := httptest.NewRecorder()
		h.ServeHTTP(w, r)
		if w.Code != tc.code || (tc.body != "" && w.Body.String() != tc.body) || w.Header().Get("Location") != tc.where {
			t.Errorf("%s %s: %d %q -> %q", tc.remote, tc.path, w.Code, w.Body.String(), w.Header().Get("Location"))
		}
	}
}
