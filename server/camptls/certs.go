package camptls

import (
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"errors"
	"fmt"
	"math/big"
	"net"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"time"
)

// File names inside the folder given to Ensure.
const (
	caCertFile   = "camp-ca.crt"
	caKeyFile    = "camp-ca.key"
	leafCertFile = "server.crt"
	leafKeyFile  = "server.key"
)

// Lifetimes. The leaf lifetime stays under the 398 days that phones accept
// for any server certificate; the authority lasts ten years so phones need
// to trust it only once.
const (
	LeafLifetime  = 397 * 24 * time.Hour
	CALifetime    = 10 * 365 * 24 * time.Hour
	RenewBefore   = 30 * 24 * time.Hour
	backdateClock = time.Hour // tolerate phones whose clocks run a little slow
)

// ErrBadFiles means the stored authority or certificate could not be read.
var ErrBadFiles = errors.New("camp certificate files are unreadable")

// Bundle is the authority and the current server certificate.
type Bundle struct {
	CA      *x509.Certificate
	CAPEM   []byte // the authority certificate phones download
	Leaf    tls.Certificate
	Renewed bool // true when Ensure made a new server certificate
}

// Ensure loads the authority and server certificate from dir, creating
// the authority if there is none and a new server certificate when there
// is none, it does not cover every name in hosts, or it expires within
// RenewBefore of now. hosts are IP addresses and DNS names.
func Ensure(dir string, hosts []string, now time.Time) (*Bundle, error) {
	if err := os.MkdirAll(dir, 0o700); err != nil {
		return nil, fmt.Errorf("camp certificates: %w", err)
	}
	ca, caKey, caPEM, err := loadOrCreateCA(dir, now)
	if err != nil {
		return nil, err
	}
	b := &Bundle{CA: ca, CAPEM: caPEM}
	leaf, err := tls.LoadX509KeyPair(filepath.Join(dir, leafCertFile), filepath.Join(dir, leafKeyFile))
	if err == nil && leaf.Leaf != nil && covers(leaf.Leaf, hosts) && now.Add(RenewBefore).Before(leaf.Leaf.NotAfter) && signedBy(leaf.Leaf, ca) {
		b.Leaf = leaf
		return b, nil
	}
	b.Leaf, err = issueLeaf(dir, ca, caKey, hosts, now)
	if err != nil {
		return nil, err
	}
	b.Renewed = true
	return b, nil
}

func signedBy(leaf, ca *x509.Certificate) bool {
	return leaf.CheckSignatureFrom(ca) == nil
}

// covers reports whether the certificate names every host.
func covers(c *x509.Certificate, hosts []string) bool {
	for _, h := range hosts {
		if ip := net.ParseIP(h); ip != nil {
			if !slices.ContainsFunc(c.IPAddresses, ip.Equal) {
				return false
			}
		} else if !slices.Contains(c.DNSNames, h) {
			return false
		}
	}
	return true
}

func loadOrCreateCA(dir string, now time.Time) (*x509.Certificate, *ecdsa.PrivateKey, []byte, error) {
	certPath, keyPath := filepath.Join(dir, caCertFile), filepath.Join(dir, caKeyFile)
	certPEM, errC := os.ReadFile(certPath)
	keyPEM, errK := os.ReadFile(keyPath)
	if errC == nil && errK == nil {
		cert, key, err := parsePair(certPEM, keyPEM)
		if err != nil {
			return nil, nil, nil, fmt.Errorf("%w: %s: %v", ErrBadFiles, certPath, err)
		}
		return cert, key, certPEM, nil
	}
	if !errors.Is(errC, os.ErrNotExist) || !errors.Is(errK, os.ErrNotExist) {
		if errC == nil || errK == nil {
			return nil, nil, nil, fmt.Errorf("%w: only one of %s and %s exists; move the other away to start a new authority", ErrBadFiles, caCertFile, caKeyFile)
		}
	}
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		return nil, nil, nil, err
	}
	host, _ := os.Hostname()
	tmpl := &x509.Certificate{
		SerialNumber:          randomSerial(),
		Subject:               pkix.Name{CommonName: "tagtally camp authority " + host + " " + now.UTC().Format("2006-01-02"), Organization: []string{"tagtally camp server"}},
		NotBefore:             now.Add(-backdateClock),
		NotAfter:              now.Add(CALifetime),
		KeyUsage:              x509.KeyUsageCertSign | x509.KeyUsageCRLSign,
		BasicConstraintsValid: true,
		IsCA:                  true,
		MaxPathLenZero:        true,
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		return nil, nil, nil, err
	}
	cert, _ := x509.ParseCertificate(der)
	certPEM = pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der})
	keyDER, err := x509.MarshalECPrivateKey(key)
	if err != nil {
		return nil, nil, nil, err
	}
	if err := writeFile(keyPath, pem.EncodeToMemory(&pem.Block{Type: "EC PRIVATE KEY", Bytes: keyDER}), 0o600); err != nil {
		return nil, nil, nil, err
	}
	if err := writeFile(certPath, certPEM, 0o644); err != nil {
		return nil, nil, nil, err
	}
	return cert, key, certPEM, nil
}

func issueLeaf(dir string, ca *x509.Certificate, caKey *ecdsa.PrivateKey, hosts []string, now time.Time) (tls.Certificate, error) {
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		return tls.Certificate{}, err
	}
	tmpl := &x509.Certificate{
		SerialNumber: randomSerial(),
		Subject:      pkix.Name{CommonName: "tagtally camp server"},
		NotBefore:    now.Add(-backdateClock),
		NotAfter:     now.Add(LeafLifetime),
		KeyUsage:     x509.KeyUsageDigitalSignature,
		ExtKeyUsage:  []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth},
	}
	sorted := append([]string(nil), hosts...)
	sort.Strings(sorted)
	for _, h := range slices.Compact(sorted) {
		if ip := net.ParseIP(h); ip != nil {
			tmpl.IPAddresses = append(tmpl.IPAddresses, ip)
		} else if h != "" {
			tmpl.DNSNames = append(tmpl.DNSNames, h)
		}
	}
	if len(tmpl.DNSNames) > 0 {
		tmpl.Subject.CommonName = tmpl.DNSNames[0]
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, ca, &key.PublicKey, caKey)
	if err != nil {
		return tls.Certificate{}, err
	}
	keyDER, err := x509.MarshalECPrivateKey(key)
	if err != nil {
		return tls.Certificate{}, err
	}
	certPEM := pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der})
	keyPEM := pem.EncodeToMemory(&pem.Block{Type: "EC PRIVATE KEY", Bytes: keyDER})
	if err := writeFile(filepath.Join(dir, leafKeyFile), keyPEM, 0o600); err != nil {
		return tls.Certificate{}, err
	}
	if err := writeFile(filepath.Join(dir, leafCertFile), certPEM, 0o644); err != nil {
		return tls.Certificate{}, err
	}
	return tls.X509KeyPair(certPEM, keyPEM)
}

func parsePair(certPEM, keyPEM []byte) (*x509.Certificate, *ecdsa.PrivateKey, error) {
	cb, _ := pem.Decode(certPEM)
	kb, _ := pem.Decode(keyPEM)
	if cb == nil || kb == nil {
		return nil, nil, errors.New("not PEM")
	}
	cert, err := x509.ParseCertificate(cb.Bytes)
	if err != nil {
		return nil, nil, err
	}
	key, err := x509.ParseECPrivateKey(kb.Bytes)
	if err != nil {
		return nil, nil, err
	}
	if !key.PublicKey.Equal(cert.PublicKey) {
		return nil, nil, errors.New("key does not match certificate")
	}
	return cert, key, nil
}

func randomSerial() *big.Int {
	n, err := rand.Int(rand.Reader, new(big.Int).Lsh(big.NewInt(1), 126))
	if err != nil {
		panic(err) // crypto/rand does not fail on supported platforms
	}
	return n.Add(n, big.NewInt(1))
}

// writeFile writes atomically: a temporary file renamed over the target,
// so a crash never leaves half a key.
func writeFile(path string, data []byte, perm os.FileMode) error {
	tmp := path + ".tmp"
	if err := os.WriteFile(tmp, data, perm); err != nil {
		return err
	}
	return os.Rename(tmp, path)
}

// LANHosts lists this machine's host name, "localhost" and the addresses
// of its up, non-loopback interfaces plus the loopback addresses, for the
// server certificate.
func LANHosts() []string {
	hosts := []string{"localhost", "127.0.0.1", "::1"}
	if h, err := os.Hostname(); err == nil && h != "" {
		hosts = append(hosts, h)
	}
	return append(hosts, LANAddresses()...)
}

// LANAddresses lists the IPv4 and IPv6 (non-link-local) addresses of the
// machine's up, non-loopback interfaces: the ones phones on the camp
// Wi-Fi use.
func LANAddresses() []string {
	var out []string
	ifaces, err := net.Interfaces()
	if err != nil {
		return nil
	}
	for _, ifc := range ifaces {
		if ifc.Flags&net.FlagUp == 0 || ifc.Flags&net.FlagLoopback != 0 {
			continue
		}
		addrs, _ := ifc.Addrs()
		for _, a := range addrs {
			ipn, ok := a.(*net.IPNet)
			if !ok || ipn.IP.IsLinkLocalUnicast() || ipn.IP.IsLoopback() {
				continue
			}
			out = append(out, ipn.IP.String())
		}
	}
	return out
}
