package server

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"net/http"
	"sync"

	"github.com/labstack/echo/v4"
	"github.com/labstack/echo/v4/middleware"

	"tagtally/capture"
	"tagtally/server/access"
)

// Server is the HTTP API over one capture store. Handlers are its methods.
type Server struct {
	cfg   Config
	store *capture.Store
	log   *slog.Logger
	echo  *echo.Echo
	// access checks every route's rule (guard.go) and keeps tokens,
	// codes and the audit log in the store's file.
	access *access.Service

	// studyMu serialises read-modify-write edits of studies (editStudy).
	studyMu sync.Mutex

	sync syncState // the sync engine, opened on first use (sync.go)
}

// New makes a server over an open store. It validates cfg. The caller keeps
// ownership of the store and closes it after Serve has returned.
func New(store *capture.Store, cfg Config) (*Server, error) {
	if store == nil {
		return nil, fmt.Errorf("%w: no store", ErrConfig)
	}
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	s := &Server{cfg: cfg, store: store, log: cfg.Logger, access: access.New(store)}
	e := echo.New()
	e.HideBanner, e.HidePort = true, true
	e.HTTPErrorHandler = s.handleError
	e.Use(middleware.RecoverWithConfig(middleware.RecoverConfig{DisablePrintStack: true, DisableErrorHandler: true}))
	e.Use(securityHeaders)
	e.Use(limitBody(cfg.MaxBodyBytes))
	e.Use(middleware.ContextTimeoutWithConfig(middleware.ContextTimeoutConfig{
		Timeout: cfg.RequestTimeout,
		Skipper: func(c echo.Context) bool { return c.Path() == backupPath || c.Path() == exportPath },
	}))
	table := s.routes()
	if err := checkRoutes(table); err != nil {
		return nil, err
	}
	for _, r := range table {
		e.Add(r.method, r.path, r.handler, s.guard(r))
	}
	s.echo = e
	return s, nil
}

// checkRoutes refuses a route table with a row that says nothing about
// access: the zero rule would let anyone in, so every route says what it
// needs.
func checkRoutes(table []route) error {
	for _, r := range table {
		if r.need.name == "" {
			return fmt.Errorf("%w: route %s %s has no access rule", ErrConfig, r.method, r.path)
		}
	}
	return nil
}

// Handler returns the server's HTTP handler, for tests and for mounting
// behind another server.
func (s *Server) Handler() http.Handler { return s.echo }

// Serve answers requests on ln until ctx ends, then shuts down gracefully:
// it stops accepting connections, lets requests in flight finish (at most
// Config.ShutdownTimeout), and returns. Only after Serve returns may the
// caller close the store. It returns nil after a clean shutdown.
func (s *Server) Serve(ctx context.Context, ln net.Listener) error {
	return s.ServeHandler(ctx, ln, s.echo)
}

// ServeHandler is Serve with another handler in front of the server's own
// (for example the plain-HTTP port that also serves the phone setup page),
// keeping the same timeouts and graceful shutdown. h must end in Handler().
func (s *Server) ServeHandler(ctx context.Context, ln net.Listener, h http.Handler) error {
	hs := &http.Server{
		Handler:           h,
		ReadHeaderTimeout: s.cfg.ReadHeaderTimeout,
		ReadTimeout:       s.cfg.ReadTimeout,
		WriteTimeout:      s.cfg.WriteTimeout,
		IdleTimeout:       s.cfg.IdleTimeout,
		ErrorLog:          slog.NewLogLogger(s.log.Handler(), slog.LevelWarn),
	}
	served := make(chan error, 1)
	go func() { served <- hs.Serve(ln) }()
	select {
	case err := <-served:
		return fmt.Errorf("server: %w", err)
	case <-ctx.Done():
	}
	s.log.Info("shutting down: finishing requests in flight", "timeout", s.cfg.ShutdownTimeout)
	sctx, cancel := context.WithTimeout(context.Background(), s.cfg.ShutdownTimeout)
	defer cancel()
	err := hs.Shutdown(sctx)
	if serr := <-served; !errors.Is(serr, http.ErrServerClosed) && serr != nil {
		err = errors.Join(err, serr)
	}
	if err != nil {
		hs.Close()
		return fmt.Errorf("server: shutdown: %w", err)
	}
	return nil
}

// limitBody caps every request body at n bytes. A body declared larger is
// refused before it is read; one that turns out larger fails when read,
// with *http.MaxBytesError, which the error handler answers with 413.
func limitBody(n int64) echo.MiddlewareFunc {
	return func(next echo.HandlerFunc) echo.HandlerFunc {
		return func(c echo.Context) error {
			r := c.Request()
			if r.ContentLength > n {
				return &http.MaxBytesError{Limit: n}
			}
			r.Body = http.MaxBytesReader(c.Response(), r.Body, n)
			return next(c)
		}
	}
}
