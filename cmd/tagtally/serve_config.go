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
	// Peer is serve's scheduled sync with another server (serve_peer.go).
	Peer peerSchedule
}

const (
	envData = "TAGTALLY_DATA"
	envPort = "TAGTALLY_PORT"
)

// defaultConfig returns the defaults with the environment applied.
func defaultConfig() (config, error) {
	c := config{Port: 8080}
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

// validate checks the settings once, before anything is opened.
func (c *config) validate() error {
	if c.Data == "" {
		return fmt.Errorf("%w: no data file: give --data PATH (no home directory was found for the default)", errUsage)
	}
	if c.Port < 0 || c.Port > 65535 {
		return fmt.Errorf("%w: port %d is out of range (1-65535, or 0 for any free port)", errUsage, c.Port)
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
