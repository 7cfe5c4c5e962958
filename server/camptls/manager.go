package camptls

import (
	"context"
	"crypto/tls"
	"fmt"
	"log/slog"
	"net"
	"slices"
	"strconv"
	"sync/atomic"
	"time"
)

// RefreshEvery is how often a running server checks whether its addresses
// changed or its certificate nears expiry. Laptops move between networks
// (camp Wi-Fi, a phone's hotspot) while serving, and a phone that reaches
// the laptop by a new address must see a certificate naming it.
const RefreshEvery = 5 * time.Minute

// Manager keeps the server certificate and the setup page current while
// the server runs. With a camp authority (NewManager) it re-issues the
// certificate from the stored authority when the machine's addresses
// change or expiry nears; with the user's own certificate (NewFixed) it
// only serves that one and the setup page offers no authority download.
type Manager struct {
	dir     string // camp authority folder; "" for a user's own certificate
	port    int    // HTTPS port named on the setup page
	hosts   func() []string
	addrs   func() []string
	log     *slog.Logger
	current atomic.Pointer[tls.Certificate]
	setup   atomic.Pointer[Setup]
}

// NewManager loads or creates the camp authority in dir and a server
// certificate for this machine's names and addresses. listenHost is the
// address the server listens on ("" for every interface: the setup page
// then offers every LAN address); port is the HTTPS port phones use.
func NewManager(dir, listenHost string, port int, log *slog.Logger) (*Manager, error) {
	m := &Manager{dir: dir, port: port, hosts: LANHosts, addrs: LANAddresses, log: log}
	m.listenOn(listenHost)
	if err := m.Refresh(time.Now()); err != nil {
		return nil, err
	}
	return m, nil
}

// NewFixed serves the user's own certificate and key (PEM files).
func NewFixed(certFile, keyFile, listenHost string, port int, log *slog.Logger) (*Manager, error) {
	cert, err := tls.LoadX509KeyPair(certFile, keyFile)
	if err != nil {
		return nil, fmt.Errorf("loading --tls-cert %s and --tls-key %s: %w", certFile, keyFile, err)
	}
	m := &Manager{port: port, hosts: LANHosts, addrs: LANAddresses, log: log}
	m.listenOn(listenHost)
	m.current.Store(&cert)
	m.setup.Store(&Setup{Addresses: m.httpsAddresses()})
	return m, nil
}

// listenOn narrows the offered addresses to the one listened on, and makes
// sure the certificate names it.
func (m *Manager) listenOn(host string) {
	if host == "" || net.ParseIP(host).IsUnspecified() {
		return
	}
	m.addrs = func() []string { return []string{host} }
	m.hosts = func() []string {
		hosts := LANHosts()
		if !slices.Contains(hosts, host) {
			hosts = append(hosts, host)
		}
		return hosts
	}
}

// Refresh re-reads the machine's addresses and, with a camp authority,
// makes a new certificate if they are not all covered or it expires
// within RenewBefore of now.
func (m *Manager) Refresh(now time.Time) error {
	if m.dir == "" {
		m.setup.Store(&Setup{Addresses: m.httpsAddresses()})
		return nil
	}
	b, err := Ensure(m.dir, m.hosts(), now)
	if err != nil {
		return err
	}
	if b.Renewed && m.log != nil {
		m.log.Info("made a new HTTPS certificate from the camp authority", "names", b.Leaf.Leaf.DNSNames, "addresses", b.Leaf.Leaf.IPAddresses, "expires", b.Leaf.Leaf.NotAfter.Format(time.DateOnly))
	}
	leaf := b.Leaf
	m.current.Store(&leaf)
	m.setup.Store(&Setup{CAPEM: b.CAPEM, Addresses: m.httpsAddresses()})
	return nil
}

// Run calls Refresh every interval until ctx ends. A failed refresh keeps
// the current certificate and is logged; the next tick tries again.
func (m *Manager) Run(ctx context.Context, every time.Duration) {
	t := time.NewTicker(every)
	defer t.Stop()
	for {
		select {
		case <-ctx.Done():
			return
		case now := <-t.C:
			if err := m.Refresh(now); err != nil && m.log != nil {
				m.log.Warn("could not renew the HTTPS certificate; keeping the current one", "err", err)
			}
		}
	}
}

// TLSConfig returns a server TLS configuration that always presents the
// current certificate, so a renewal needs no restart.
func (m *Manager) TLSConfig() *tls.Config {
	return &tls.Config{
		MinVersion: tls.VersionTLS12,
		GetCertificate: func(*tls.ClientHelloInfo) (*tls.Certificate, error) {
			return m.current.Load(), nil
		},
	}
}

// Certificate is the certificate being served now.
func (m *Manager) Certificate() *tls.Certificate { return m.current.Load() }

// CAPEM is the camp authority certificate, or nil with the user's own
// certificate.
func (m *Manager) CAPEM() []byte { return m.setup.Load().CAPEM }

// Addresses are the HTTPS addresses phones can open, LAN addresses first.
func (m *Manager) Addresses() []string { return slices.Clone(m.setup.Load().Addresses) }

// Port is the HTTPS port.
func (m *Manager) Port() int { return m.port }

// SetupHandler serves the current setup page.
func (m *Manager) SetupHandler() *SetupHandler { return &SetupHandler{m: m} }

func (m *Manager) httpsAddresses() []string {
	var out []string
	for _, a := range m.addrs() {
		out = append(out, "https://"+net.JoinHostPort(a, strconv.Itoa(m.port))+"/")
	}
	return out
}
