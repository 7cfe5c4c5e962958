package main

import (
	"context"
	"crypto/tls"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net"
	"os"
	"os/signal"
	"strconv"
	"sync/atomic"
	"syscall"

	"tagtally/demo"
	"tagtally/server"
	"tagtally/server/access"
	"tagtally/server/camptls"
)

const serveHelp = `
Runs the base-camp server: the API that the crews' phones and the
coordinator's browser use. It keeps everything in one data file and
listens on every network interface, so phones on the camp Wi-Fi can
connect; it prints the addresses to open.

Stop it with Ctrl+C: records being saved at that moment are finished
first. Every record the server has acknowledged is on disk, even if the
computer loses power.

Phones need HTTPS for the app to work offline. On first start serve makes
a certificate authority for this camp (kept in the folder camp-tls beside
the data file) and a certificate for this computer's addresses, renewed by
itself when the addresses change or it nears expiry. Each phone trusts the
authority once, from the setup page on the plain-HTTP port (the address
ends in /setup; it shows a QR code of the HTTPS address and the steps for
Android and iPhone). On this computer itself plain HTTP is enough.

Nobody can use the server without being let in. At each start serve
prints a one-time coordinator link (http://localhost:PORT/coord/#claim=...):
open it on this computer to sign the browser in; it works once, for 12
hours. On the coordinator's Access page, make join codes for phones (a QR
code each phone scans), revoke lost phones and make tokens for other
servers. While it runs, serve keeps a token for the tagtally commands on
this computer beside the data file (DATA.token, readable only by you).

With --demo it first adds the invented demonstration study (a wood-mouse
trapping grid) to the data file, so there is something to look at.`

func runServe(args []string, stdout io.Writer) error {
	cfg, err := defaultConfig()
	if err != nil {
		return err
	}
	fs := newFlagSet("serve", "tagtally serve [options]", serveHelp)
	fs.SetOutput(stdout)
	cfg.addDataFlag(fs)
	cfg.addPortFlag(fs, "the port to listen on; phones use it in the address")
	cfg.addTLSFlags(fs)
	fs.StringVar(&cfg.Host, "host", "", "listen only on this IP address (e.g. 127.0.0.1 for this computer only); empty means every network interface")
	cfg.Peer.addFlags(fs)
	withDemo := fs.Bool("demo", false, "add the invented demonstration study to the data file before serving (safe to repeat)")
	if err := parseArgs(fs, args, 0); err != nil {
		return err
	}
	if err := cfg.validate(); err != nil {
		return err
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	// After the first Ctrl+C a second one stops at once, the usual way
	// (acknowledged records are on disk either way).
	go func() { <-ctx.Done(); stop() }()
	return serve(ctx, cfg, *withDemo, stdout)
}

// serve opens the data file, optionally loads the demo, and serves until
// ctx ends; then it finishes requests in flight and closes the file.
func serve(ctx context.Context, cfg config, withDemo bool, stdout io.Writer) (err error) {
	store, err := openStore(cfg.Data)
	if err != nil {
		return err
	}
	defer func() {
		if cerr := store.Close(); cerr != nil && err == nil {
			err = fmt.Errorf("closing the data file: %w", cerr)
		}
	}()
	if withDemo {
		n, err := demo.Load(store)
		if err != nil {
			return err
		}
		reportDemo(stdout, n)
	}
	scfg := server.DefaultConfig()
	scfg.Addr = net.JoinHostPort(cfg.Host, strconv.Itoa(cfg.Port))
	// Join links name the camp's HTTPS address once the certificates
	// exist; with --no-tls, the plain address phones reach (never the
	// localhost the coordinator's own browser uses).
	var phoneCerts atomic.Pointer[camptls.Manager]
	var plainPort atomic.Int64
	scfg.PhoneAddress = func() string {
		if m := phoneCerts.Load(); m != nil {
			if a := m.Addresses(); len(a) > 0 {
				return a[0]
			}
		}
		if p := plainPort.Load(); p != 0 {
			return plainPhoneAddress(cfg.Host, int(p), lanAddresses())
		}
		return ""
	}
	srv, err := server.New(store, scfg)
	if err != nil {
		return err
	}
	// After serving and the scheduled peer sync have stopped (deferred
	// below, so run before this), before the store closes.
	defer func() {
		if cerr := srv.CloseSync(); cerr != nil && err == nil {
			err = fmt.Errorf("closing sync: %w", cerr)
		}
	}()
	stopPeerSync, err := cfg.Peer.start(ctx, srv)
	if err != nil {
		return err
	}
	defer stopPeerSync() // before the store closes
	ln, err := net.Listen("tcp", scfg.Addr)
	if err != nil {
		return fmt.Errorf("cannot listen on port %d: %w (is another server using it? try --port)", cfg.Port, err)
	}
	port := ln.Addr().(*net.TCPAddr).Port
	stopToken, err := startLocalToken(srv.Access(), cfg.Data)
	if err != nil {
		ln.Close()
		return err
	}
	defer stopToken()
	if cfg.NoTLS {
		plainPort.Store(int64(port))
		printAddresses(stdout, cfg, port, nil)
		if err := printClaimLink(stdout, srv, port); err != nil {
			ln.Close()
			return err
		}
		return finishServing(stdout, srv.Serve(ctx, ln))
	}

	tlsLn, certs, err := listenTLS(cfg, scfg.Logger)
	if err != nil {
		ln.Close()
		return err
	}
	phoneCerts.Store(certs)
	printAddresses(stdout, cfg, port, certs)
	if err := printClaimLink(stdout, srv, port); err != nil {
		ln.Close()
		tlsLn.Close()
		return err
	}
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	go certs.Run(ctx, camptls.RefreshEvery)
	// Either server failing stops both: a half-running camp server would
	// leave phones or the coordinator puzzled.
	plainErr := make(chan error, 1)
	go func() {
		plainErr <- srv.ServeHandler(ctx, ln, camptls.PlainHTTP(srv.Handler(), certs.SetupHandler()))
		cancel()
	}()
	tlsErr := srv.Serve(ctx, tlsLn)
	cancel()
	return finishServing(stdout, errors.Join(tlsErr, <-plainErr))
}

// printClaimLink makes a new one-time coordinator link (older unused
// ones stop working) and prints it.
func printClaimLink(w io.Writer, srv *server.Server, port int) error {
	code, err := srv.Access().NewClaim()
	if err != nil {
		return err
	}
	fmt.Fprintf(w, "Coordinator: open this link once, on this computer, within %d hours (it signs this browser in):\n  %s\n", int(access.ClaimTTL.Hours()), server.ClaimURL("http://localhost:"+strconv.Itoa(port), code))
	fmt.Fprintln(w, "  (a lost link is replaced by `tagtally access link`; phones join with codes made on the Access page)")
	return nil
}

func finishServing(stdout io.Writer, err error) error {
	if err != nil {
		return err
	}
	fmt.Fprintln(stdout, "Stopped; every acknowledged record is saved.")
	return nil
}

// listenTLS opens the HTTPS port with the user's certificate or the camp
// authority's. The default port falls back to a free one when taken
// (printed with the addresses); a port the user chose must be free.
func listenTLS(cfg config, log *slog.Logger) (net.Listener, *camptls.Manager, error) {
	addr := net.JoinHostPort(cfg.Host, strconv.Itoa(cfg.TLSPort))
	raw, err := net.Listen("tcp", addr)
	if err != nil && !cfg.tlsPortSet {
		raw, err = net.Listen("tcp", net.JoinHostPort(cfg.Host, "0"))
	}
	if err != nil {
		return nil, nil, fmt.Errorf("cannot listen on HTTPS port %d: %w (is another server using it? try --tls-port, or --no-tls)", cfg.TLSPort, err)
	}
	port := raw.Addr().(*net.TCPAddr).Port
	var certs *camptls.Manager
	if cfg.TLSCert != "" {
		certs, err = camptls.NewFixed(cfg.TLSCert, cfg.TLSKey, cfg.Host, port, log)
	} else {
		certs, err = camptls.NewManager(cfg.campTLSDir(), cfg.Host, port, log)
	}
	if err != nil {
		raw.Close()
		return nil, nil, err
	}
	return tls.NewListener(raw, certs.TLSConfig()), certs, nil
}

// printAddresses tells the user what to open: this computer's address and,
// when listening on every interface, the addresses phones can use. certs
// is nil without HTTPS.
func printAddresses(w io.Writer, cfg config, port int, certs *camptls.Manager) {
	fmt.Fprintf(w, "tagtally %s is serving the data file %s\n", version, cfg.Data)
	portStr := strconv.Itoa(port)
	host := cfg.Host
	if host == "" || net.ParseIP(host).IsUnspecified() {
		fmt.Fprintf(w, "Open on this computer:  http://localhost:%d/\n", port)
		lan := lanAddresses()
		switch {
		case len(lan) == 0:
			fmt.Fprintln(w, "No network address found: phones cannot connect until this computer joins a network.")
		case certs == nil:
			fmt.Fprintln(w, "Open on phones and laptops on the same network (plain HTTP: the phone app will not work offline):")
			for _, ip := range lan {
				fmt.Fprintf(w, "  http://%s/\n", net.JoinHostPort(ip, portStr))
			}
		default:
			fmt.Fprintln(w, "Phones on the same network: open the setup page once to trust this camp's certificate,")
			for _, ip := range lan {
				fmt.Fprintf(w, "  http://%s%s\n", net.JoinHostPort(ip, portStr), camptls.SetupPath)
			}
			fmt.Fprintln(w, "then the app (it works offline from then on):")
			for _, a := range certs.Addresses() {
				fmt.Fprintf(w, "  %s\n", a)
			}
		}
		host = "localhost"
	} else {
		fmt.Fprintf(w, "Open:  http://%s/\n", net.JoinHostPort(host, portStr))
		if certs != nil {
			fmt.Fprintf(w, "Phones: set up at http://%s%s, then open https://%s/\n", net.JoinHostPort(host, portStr), camptls.SetupPath, net.JoinHostPort(host, strconv.Itoa(certs.Port())))
		}
	}
	if certs != nil && len(certs.CAPEM()) > 0 {
		fmt.Fprintf(w, "Camp certificate authority: %s (keep it with the data file; phones trust it)\n", cfg.campTLSDir())
	}
	fmt.Fprintf(w, "API:   http://%s/api/v1 lists the endpoints\n", net.JoinHostPort(host, portStr))
	fmt.Fprintln(w, "Stop with Ctrl+C (records being saved are finished first).")
}

// plainPhoneAddress is the plain-HTTP address phones open: the listen
// host when one is given, else the first LAN address; "" when there is
// none (join links then name the address the coordinator's request used).
func plainPhoneAddress(host string, port int, lan []string) string {
	if host != "" && !net.ParseIP(host).IsUnspecified() {
		return "http://" + net.JoinHostPort(host, strconv.Itoa(port))
	}
	if len(lan) > 0 {
		return "http://" + net.JoinHostPort(lan[0], strconv.Itoa(port))
	}
	return ""
}

// lanAddresses lists this machine's non-loopback IPv4 addresses on
// interfaces that are up, then IPv6 ones that are not link-local.
func lanAddresses() []string {
	ifaces, err := net.Interfaces()
	if err != nil {
		return nil
	}
	var v4, v6 []string
	for _, ifc := range ifaces {
		if ifc.Flags&net.FlagUp == 0 || ifc.Flags&net.FlagLoopback != 0 {
			continue
		}
		addrs, err := ifc.Addrs()
		if err != nil {
			continue
		}
		for _, a := range addrs {
			ipn, ok := a.(*net.IPNet)
			if !ok || ipn.IP.IsLoopback() || ipn.IP.IsLinkLocalUnicast() {
				continue
			}
			if ip4 := ipn.IP.To4(); ip4 != nil {
				v4 = append(v4, ip4.String())
			} else {
				v6 = append(v6, ipn.IP.String())
			}
		}
	}
	return append(v4, v6...)
}
