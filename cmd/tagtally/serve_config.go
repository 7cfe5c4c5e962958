package main

import (
	"errors"
	"flag"
	"fmt"
	"net"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
)

// config is everything serve, demo and backup need to know: which data
// file, and where the server listens. Defaults come first, then the
// environment (TAGTALLY_DATA, TAGTALLY_PORT), then flags; validate once.
type config struct {
	// Data is the path of the data file (one bbolt file holds everything).
	Data string
	// Port is the TCP port the server listens on; 0 picks a free one.
	Port int
	// Host is the address to listen on; "" means every network interface,
	// so phones on the camp Wi-Fi can connect.
	Host string
	// TLSPort is the HTTPS port for phones (0 picks a free one). When it
	// was not chosen by the user and is taken, serve falls back to a free
	// port rather than refusing to start.
	TLSPort    int
	tlsPortSet bool
	// TLSCert and TLSKey are the user's own certificate and key (PEM);
	// empty means the camp authority kept beside the data file.
	TLSCert, TLSKey string
	// NoTLS serves plain HTTP only (phones then cannot work offline).
	NoTLS bool
	// Peer is serve's scheduled sync with another server (serve_peer.go).
	Peer peerSchedule
}

const (
	envData = "TAGTALLY_DATA"
	envPort = "TAGTALLY_PORT"
	envTLS  = "TAGTALLY_TLS_PORT"

	defaultTLSPort = 8443
)

// defaultConfig returns the defaults with the environment applied.
func defaultConfig() (config, error) {
	c := config{Port: 8080, TLSPort: defaultTLSPort}
	dir, err := dataDir()
	if err == nil {
		c.Data = filepath.Join(dir, "tagtally", "tagtally.db")
	}
	if v := os.Getenv(envData); v != "" {
		c.Data = v
	}
	if v := os.Getenv(envPort); v != "" {
		p, err := strconv.Atoi(v)
		if err != nil {
			return c, fmt.Errorf("%w: %s=%q is not a port number", errUsage, envPort, v)
		}
		c.Port = p
	}
	if v := os.Getenv(envTLS); v != "" {
		p, err := strconv.Atoi(v)
		if err != nil {
			return c, fmt.Errorf("%w: %s=%q is not a port number", errUsage, envTLS, v)
		}
		c.TLSPort, c.tlsPortSet = p, true
	}
	return c, nil
}

// dataDir is where per-user program data lives: $XDG_DATA_HOME or
// ~/.local/share on Linux and other Unix systems, the user configuration
// directory (Application Support, AppData) on macOS and Windows.
func dataDir() (string, error) {
	switch runtime.GOOS {
	case "darwin", "windows", "ios", "plan9":
		return os.UserConfigDir()
	}
	if d := os.Getenv("XDG_DATA_HOME"); d != "" {
		return d, nil
	}
	home, err := os.UserHomeDir()
	if err != nil {
		return "", err
	}
	return filepath.Join(home, ".local", "share"), nil
}

// addDataFlag and addListenFlags put the shared options on a flag set, with
// the current values (defaults plus environment) as their defaults.
func (c *config) addDataFlag(fs *flag.FlagSet) {
	fs.StringVar(&c.Data, "data", c.Data, "the data file that holds every study and record (environment: "+envData+")")
}

func (c *config) addPortFlag(fs *flag.FlagSet, what string) {
	fs.IntVar(&c.Port, "port", c.Port, what+" (environment: "+envPort+")")
}

// addTLSFlags puts the HTTPS options of serve on a flag set.
func (c *config) addTLSFlags(fs *flag.FlagSet) {
	fs.Func("tls-port", fmt.Sprintf("the HTTPS port phones use for the offline app (default %d; environment: %s)", c.TLSPort, envTLS), func(v string) error {
		p, err := strconv.Atoi(v)
		if err != nil {
			return fmt.Errorf("%q is not a port number", v)
		}
		c.TLSPort, c.tlsPortSet = p, true
		return nil
	})
	fs.StringVar(&c.TLSCert, "tls-cert", "", "your own HTTPS certificate (PEM file) instead of the camp certificate authority; needs --tls-key")
	fs.StringVar(&c.TLSKey, "tls-key", "", "the private key (PEM file) of --tls-cert")
	fs.BoolVar(&c.NoTLS, "no-tls", false, "serve plain HTTP only; phones on the network then cannot use the app offline")
}

// campTLSDir is where the camp certificate authority is kept: beside the
// data file, so a backup of that folder keeps phones' trust working.
func (c *config) campTLSDir() string { return filepath.Join(filepath.Dir(c.Data), "camp-tls") }

// validate checks the settings once, before anything is opened.
func (c *config) validate() error {
	if c.Data == "" {
		return fmt.Errorf("%w: no data file: give --data PATH (no home directory was found for the default)", errUsage)
	}
	if c.Port < 0 || c.Port > 65535 {
		return fmt.Errorf("%w: port %d is out of range (1-65535, or 0 for any free port)", errUsage, c.Port)
	}
	if c.TLSPort < 0 || c.TLSPort > 65535 {
		return fmt.Errorf("%w: HTTPS port %d is out of range (1-65535, or 0 for any free port)", errUsage, c.TLSPort)
	}
	if (c.TLSCert == "") != (c.TLSKey == "") {
		return fmt.Errorf("%w: --tls-cert and --tls-key go together: give both or neither", errUsage)
	}
	if c.NoTLS && c.TLSCert != "" {
		return fmt.Errorf("%w: --no-tls and --tls-cert contradict each other", errUsage)
	}
	if !c.NoTLS && c.Port != 0 && c.TLSPort == c.Port {
		return fmt.Errorf("%w: the HTTPS port and --port are both %d; give them different ports", errUsage, c.Port)
	}
	if c.Host != "" && net.ParseIP(c.Host) == nil {
		return fmt.Errorf("%w: --host %q is not an IP address of this machine", errUsage, c.Host)
	}
	if err := c.Peer.validate(); err != nil {
		return err
	}
	if fi, err := os.Stat(c.Data); err == nil && fi.IsDir() {
		return fmt.Errorf("%w: --data %s is a folder; give the path of a file, e.g. %s", errUsage, c.Data, filepath.Join(c.Data, "tagtally.db"))
	} else if err != nil && !errors.Is(err, os.ErrNotExist) {
		return fmt.Errorf("data file %s: %w", c.Data, err)
	}
	return nil
}

// parseArgs parses a command's flags and rejects stray arguments unless
// the command takes some (positional > 0 is the most it takes).
func parseArgs(fs *flag.FlagSet, args []string, positional int) error {
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return err
		}
		return fmt.Errorf("%w: %v", errUsage, err)
	}
	if fs.NArg() > positional {
		return fmt.Errorf("%w: unexpected argument %q (see `tagtally %s --help`)", errUsage, fs.Arg(positional), fs.Name())
	}
	return nil
}
