package server

import (
	"crypto/subtle"
	"errors"
	"fmt"
	"net"
	"net/http"
	"slices"
	"strings"

	"github.com/labstack/echo/v4"

	"tagtally/server/access"
)

// rule is what a route needs, the access column of the route table. One
// middleware (guard) checks every route against its rule.
type rule struct {
	// name is shown in GET /api/v1 and the README.
	name string
	// roles may use the route; none means anyone, without a token.
	roles []access.Role
	// study: the :study path parameter must be in the token's scope.
	study bool
	// local: only requests from this machine (loopback), on top of roles.
	local bool
	// attempt: each request counts against the code-exchange limits
	// (claim and join), per client address and overall.
	attempt bool
}

var (
	all       = []access.Role{access.Coordinator, access.Recorder, access.Viewer, access.Peer}
	coordOnly = []access.Role{access.Coordinator}

	ruleAnyone = rule{name: "anyone"}
	// ruleCodeExchange: anyone holding a code; attempts are limited.
	ruleCodeExchange = rule{name: "anyone with a code (attempts limited)", attempt: true}
	ruleSignedIn     = rule{name: "any valid token", roles: all}
	ruleStudies      = rule{name: "coordinator, recorder, viewer (their studies listed)", roles: []access.Role{access.Coordinator, access.Recorder, access.Viewer}}
	ruleReadStudy    = rule{name: "coordinator, recorder or viewer of the study", roles: []access.Role{access.Coordinator, access.Recorder, access.Viewer}, study: true}
	ruleWriteStudy   = rule{name: "coordinator or recorder of the study", roles: []access.Role{access.Coordinator, access.Recorder}, study: true}
	ruleExportStudy  = rule{name: "coordinator or viewer of the study", roles: []access.Role{access.Coordinator, access.Viewer}, study: true}
	ruleCoordStudy   = rule{name: "coordinator", roles: coordOnly, study: true}
	ruleCoordinator  = rule{name: "coordinator", roles: coordOnly}
	ruleCoordLocal   = rule{name: "coordinator, on this machine only", roles: coordOnly, local: true}
	ruleSyncRead     = rule{name: "coordinator, recorder, viewer or peer (their studies only)", roles: all}
	ruleSyncPush     = rule{name: "coordinator, recorder or peer (their studies only)", roles: []access.Role{access.Coordinator, access.Recorder, access.Peer}}
)

// maxCodeBody caps the body of a claim or join request.
const maxCodeBody = 4096

// Where a token travels.
const (
	// SessionCookie holds a coordinator's browser session token.
	SessionCookie = "tagtally_session"
	// CSRFHeader must carry the session's CSRF token on every
	// state-changing request authenticated by the cookie.
	CSRFHeader = "X-CSRF-Token"
	ctxToken   = "access.token"
)

// stateChanging reports whether a method may change data: those requests
// need a CSRF token with a cookie and are written to the audit log.
func stateChanging(method string) bool {
	return method != http.MethodGet && method != http.MethodHead && method != http.MethodOptions
}

// guard is the access middleware for one route: it checks the rule,
// puts the token in the context for the handler, and writes an audit
// entry for every state-changing request once it is answered (with a
// valid token, or at the code exchanges).
func (s *Server) guard(r route) echo.MiddlewareFunc {
	return func(next echo.HandlerFunc) echo.HandlerFunc {
		return func(c echo.Context) error {
			tok, err := s.admit(c, r.need)
			if err == nil {
				err = next(c)
			}
			if stateChanging(c.Request().Method) {
				if tok == nil {
					tok = tokenOf(c) // a claim or join names the token it made
				}
				// Requests without a valid token are audited only where
				// attempts are limited (claim, join), and only those let
				// through the limit: elsewhere, or past it, anyone on the
				// network could fill the data file with refusals.
				throttled := errors.Is(err, access.ErrTooManyAttempts)
				if tok != nil || (r.need.attempt && !throttled) {
					s.audit(c, r, tok, err)
				} else {
					s.log.Info("refused a change without a valid token", "method", c.Request().Method, "path", c.Request().URL.Path, "client", clientIP(c.Request()))
				}
			}
			return err
		}
	}
}

// admit checks a request against a rule and returns its token (nil for
// routes anyone may use).
func (s *Server) admit(c echo.Context, need rule) (*access.Token, error) {
	req := c.Request()
	if need.local && !fromLoopback(req) {
		return nil, fmt.Errorf("%w: this can be done only on the server's own machine (run the tagtally command there)", access.ErrDenied)
	}
	if need.attempt {
		if ok, wait := s.access.Attempt.Allow(clientIP(req)); !ok {
			c.Response().Header().Set("Retry-After", fmt.Sprint(int(wait.Seconds())+1))
			return nil, access.ErrTooManyAttempts
		}
		// Anyone may send these: a code and a name fit in a few hundred
		// bytes, so no more is read.
		req.Body = http.MaxBytesReader(c.Response(), req.Body, maxCodeBody)
	}
	if len(need.roles) == 0 {
		return nil, nil
	}
	secret, byCookie := credentials(req)
	tok, err := s.access.Authenticate(secret)
	if err != nil {
		return nil, err
	}
	c.Set(ctxToken, tok)
	if byCookie && stateChanging(req.Method) {
		got := req.Header.Get(CSRFHeader)
		if tok.CSRF == "" || subtle.ConstantTimeCompare([]byte(got), []byte(tok.CSRF)) != 1 {
			return tok, fmt.Errorf("%w: a change made with the session cookie must carry the page's %s header; reload the coordinator's page", access.ErrDenied, CSRFHeader)
		}
	}
	if !slices.Contains(need.roles, tok.Role) {
		return tok, fmt.Errorf("%w: a %s token cannot do this (it needs: %s)", access.ErrDenied, tok.Role, need.name)
	}
	if need.study && !tok.Allows(c.Param("study")) {
		return tok, fmt.Errorf("%w: this token is for study %s, not %q", access.ErrDenied, strings.Join(tok.Studies, ", "), c.Param("study"))
	}
	return tok, nil
}

// credentials reads the bearer token, else the session cookie. A request
// carrying a bearer header is judged by it alone.
func credentials(r *http.Request) (secret string, byCookie bool) {
	if h := r.Header.Get(echo.HeaderAuthorization); h != "" {
		t, ok := strings.CutPrefix(h, "Bearer ")
		if !ok {
			return "", false
		}
		return strings.TrimSpace(t), false
	}
	if ck, err := r.Cookie(SessionCookie); err == nil {
		return ck.Value, true
	}
	return "", false
}

// tokenOf is the request's token, set by guard; nil on open routes.
func tokenOf(c echo.Context) *access.Token {
	t, _ := c.Get(ctxToken).(*access.Token)
	return t
}

// audit writes the entry for a state-changing request. A failure to
// write it is logged, not answered: the change itself is committed.
func (s *Server) audit(c echo.Context, r route, tok *access.Token, err error) {
	code := c.Response().Status
	if err != nil {
		code, _ = status(err)
	}
	e := access.Entry{
		Method: c.Request().Method, Route: r.path, Path: c.Request().URL.Path,
		Study: c.Param("study"), Record: c.Param("id"), Status: code, Client: clientIP(c.Request()),
	}
	if tok != nil {
		e.Who, e.TokenID, e.Role = tok.Label, tok.ID, tok.Role
	}
	if id, ok := c.Get(ctxAuditRecord).(string); ok && e.Record == "" {
		e.Record = id
	}
	if werr := s.access.Record(e); werr != nil {
		s.log.Error("audit log write failed", "method", e.Method, "path", e.Path, "err", werr)
	}
}

// ctxAuditRecord lets a handler name the record it made (a created
// capture, a revoked token) for the audit entry.
const ctxAuditRecord = "access.record"

func fromLoopback(r *http.Request) bool {
	ip := net.ParseIP(clientIP(r))
	return ip != nil && ip.IsLoopback()
}

// clientIP is the request's network address without the port. Headers
// such as X-Forwarded-For are not trusted: the camp server faces phones
// directly.
func clientIP(r *http.Request) string {
	host, _, err := net.SplitHostPort(r.RemoteAddr)
	if err != nil {
		return r.RemoteAddr
	}
	return host
}

// securityHeaders go on every answer: the pages may run only the app's own
// scripts (no inline script, no eval), may not be framed, content types
// are not guessed, and no address leaks in the Referer. Images may be
// data: URLs for the join code's QR image.
func securityHeaders(next echo.HandlerFunc) echo.HandlerFunc {
	return func(c echo.Context) error {
		h := c.Response().Header()
		h.Set("Content-Security-Policy", "default-src 'self'; script-src 'self'; style-src 'self'; img-src 'self' data:; connect-src 'self'; object-src 'none'; base-uri 'none'; form-action 'self'; frame-ancestors 'none'")
		h.Set("X-Frame-Options", "DENY")
		h.Set("X-Content-Type-Options", "nosniff")
		h.Set("Referrer-Policy", "no-referrer")
		if strings.HasPrefix(c.Request().URL.Path, "/api/") {
			// API answers may carry tokens and records: never cached.
			h.Set("Cache-Control", "no-store")
		}
		return next(c)
	}
}
