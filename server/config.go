package server

import (
	"errors"
	"fmt"
	"log/slog"
	"net"
	"time"
)

// ErrConfig is wrapped by every configuration error.
var ErrConfig = errors.New("server config")

// Config holds the server's settings. Start from DefaultConfig, change what
// you need and call Validate once (New does).
type Config struct {
	// Addr is the listen address, host:port. An empty host listens on all
	// interfaces, which phones on the camp network need.
	Addr string
	// MaxBodyBytes caps a request body; a larger one gets 413.
	MaxBodyBytes int64
	// ReadHeaderTimeout, ReadTimeout, WriteTimeout and IdleTimeout are the
	// http.Server's; they stop slow or stalled clients from holding
	// connections for ever. Long downloads (the backup) extend their own
	// write deadline.
	ReadHeaderTimeout time.Duration
	ReadTimeout       time.Duration
	WriteTimeout      time.Duration
	IdleTimeout       time.Duration
	// RequestTimeout bounds the work of one API request (its context's
	// deadline).
	RequestTimeout time.Duration
	// ShutdownTimeout is how long a graceful shutdown waits for requests in
	// flight before closing their connections.
	ShutdownTimeout time.Duration
	// Version is the tagtally version named in exported workbooks.
	Version string
	// PhoneAddress returns the base address phones open (the camp's
	// HTTPS address), for join links; nil or "" uses the address the
	// coordinator's request came to.
	PhoneAddress func() string
	// Logger receives request errors and server events; nil means
	// slog.Default().
	Logger *slog.Logger
}

// DefaultConfig returns the settings used by `tagtally serve`.
func DefaultConfig() Config {
	return Config{
		Addr:              ":8080",
		MaxBodyBytes:      8 << 20, // a pushed batch of 500 records is about 0.2 MiB
		ReadHeaderTimeout: 10 * time.Second,
		ReadTimeout:       60 * time.Second,
		WriteTimeout:      60 * time.Second,
		IdleTimeout:       120 * time.Second,
		RequestTimeout:    30 * time.Second,
		ShutdownTimeout:   20 * time.Second,
	}
}

// Validate checks the settings and fills in the logger.
func (c *Config) Validate() error {
	host, port, err := net.SplitHostPort(c.Addr)
	if err != nil {
		return fmt.Errorf("%w: listen address %q: %v", ErrConfig, c.Addr, err)
	}
	if host != "" && net.ParseIP(host) == nil && host != "localhost" {
		return fmt.Errorf("%w: listen host %q is not an IP address", ErrConfig, host)
	}
	if _, err := net.LookupPort("tcp", port); err != nil {
		return fmt.Errorf("%w: listen port %q: %v", ErrConfig, port, err)
	}
	if c.MaxBodyBytes < 1024 {
		return fmt.Errorf("%w: body limit %d bytes is too small (at least 1024)", ErrConfig, c.MaxBodyBytes)
	}
	for _, d := range []struct {
		name string
		v    time.Duration
	}{
		{"read-header timeout", c.ReadHeaderTimeout}, {"read timeout", c.ReadTimeout},
		{"write timeout", c.WriteTimeout}, {"idle timeout", c.IdleTimeout},
		{"request timeout", c.RequestTimeout}, {"shutdown timeout", c.ShutdownTimeout},
	} {
		if d.v <= 0 {
			return fmt.Errorf("%w: %s must be positive, got %v", ErrConfig, d.name, d.v)
		}
	}
	if c.Logger == nil {
		c.Logger = slog.Default()
	}
	return nil
}
