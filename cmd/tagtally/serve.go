package main

import (
	"context"
	"fmt"
	"io"
	"net"
	"os"
	"os/signal"
	"strconv"
	"syscall"

	"tagtally/demo"
	"tagtally/server"
)

const serveHelp = `
Runs the base-camp server: the API that the crews' phones and the
coordinator's browser use. It keeps everything in one data file and
listens on every network interface, so phones on the camp Wi-Fi can
connect; it prints the addresses to open.

Stop it with Ctrl+C: records being saved at that moment are finished
first. Every record the server has acknowledged is on disk, even if the
computer loses power.

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
	srv, err := server.New(store, scfg)
	if err != nil {
		return err
	}
	stopPeerSync, err := cfg.Peer.start(ctx, srv)
	if err != nil {
		return err
	}
	defer stopPeerSync() // before the store closes
	ln, err := net.Listen("tcp", scfg.Addr)
	if err != nil {
		return fmt.Errorf("cannot listen on port %d: %w (is another server using it? try --port)", cfg.Port, err)
	}
	printAddresses(stdout, cfg, ln.Addr().(*net.TCPAddr).Port)
	if err := srv.Serve(ctx, ln); err != nil {
		return err
	}
	fmt.Fprintln(stdout, "Stopped; every acknowledged record is saved.")
	return nil
}

// printAddresses tells the user what to open: this computer's address and,
// when listening on every interface, the LAN addresses phones can use.
func printAddresses(w io.Writer, cfg config, port int) {
	fmt.Fprintf(w, "tagtally %s is serving the data file %s\n", version, cfg.Data)
	host := cfg.Host
	if host == "" || net.ParseIP(host).IsUnspecified() {
		fmt.Fprintf(w, "Open on this computer:  http://localhost:%d/\n", port)
		if lan := lanAddresses(); len(lan) > 0 {
			fmt.Fprintln(w, "Open on phones and laptops on the same network:")
			for _, ip := range lan {
				fmt.Fprintf(w, "  http://%s/\n", net.JoinHostPort(ip, strconv.Itoa(port)))
			}
		} else {
			fmt.Fprintln(w, "No network address found: phones cannot connect until this computer joins a network.")
		}
		host = "localhost"
	} else {
		fmt.Fprintf(w, "Open:  http://%s/\n", net.JoinHostPort(host, strconv.Itoa(port)))
	}
	fmt.Fprintf(w, "API:   http://%s/api/v1 lists the endpoints\n", net.JoinHostPort(host, strconv.Itoa(port)))
	fmt.Fprintln(w, "Stop with Ctrl+C (records being saved are finished first).")
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
