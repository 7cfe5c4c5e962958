package server

import (
	"net/http"
	"strconv"
	"strings"
	"time"

	"github.com/labstack/echo/v4"
	qrcode "github.com/skip2/go-qrcode"

	"tagtally/server/access"
)

// Access is the server's access control, for `tagtally serve` (the
// coordinator link, this machine's token) and `tagtally access`.
func (s *Server) Access() *access.Service { return s.access }

// tokenAnswer describes a token; Token, the secret, is sent only when the
// token is made, and CSRF only to its own session.
type tokenAnswer struct {
	Secret string `json:"token,omitempty"`
	CSRF   string `json:"csrf,omitempty"`
	*access.Token
}

// claimRequest is the body of POST /api/v1/access/claim.
type claimRequest struct {
	Code  string `json:"code"`
	Label string `json:"label"`
}

// claim answers POST /api/v1/access/claim: the coordinator link's code
// becomes a coordinator session, sent as an HttpOnly, SameSite=Strict
// cookie; the answer carries the CSRF token the pages send back.
func (s *Server) claim(c echo.Context) error {
	var req claimRequest
	if err := bindJSON(c, &req); err != nil {
		return err
	}
	if req.Label == "" {
		req.Label = "coordinator (browser)"
	}
	secret, tok, err := s.access.Claim(req.Code, req.Label)
	if err != nil {
		return err
	}
	c.Set(ctxToken, tok)
	c.SetCookie(&http.Cookie{Name: SessionCookie, Value: secret, Path: "/", HttpOnly: true,
		SameSite: http.SameSiteStrictMode, Secure: c.Request().TLS != nil})
	return c.JSON(http.StatusOK, tokenAnswer{CSRF: tok.CSRF, Token: tok})
}

// joinRequest is the body of POST /api/v1/join.
type joinRequest struct {
	Code   string `json:"code"`
	Device string `json:"device"`
}

// join answers POST /api/v1/join: a join code becomes a device token bound
// to the code's study and role; the phone keeps it and sends it as a
// bearer token.
func (s *Server) join(c echo.Context) error {
	var req joinRequest
	if err := bindJSON(c, &req); err != nil {
		return err
	}
	if strings.TrimSpace(req.Device) == "" {
		return badRequest("device", "name this phone (e.g. \"crew 2 phone\") so the coordinator can tell it apart")
	}
	secret, tok, err := s.access.Join(req.Code, req.Device)
	if err != nil {
		return err
	}
	c.Set(ctxToken, tok)
	c.Set(ctxAuditRecord, tok.ID)
	return c.JSON(http.StatusCreated, tokenAnswer{Secret: secret, Token: tok})
}

// me answers GET /api/v1/access/me: what the request's token is, and a
// session's CSRF token (readable only with the session's cookie).
func (s *Server) me(c echo.Context) error {
	tok := tokenOf(c)
	_, byCookie := credentials(c.Request())
	a := tokenAnswer{Token: tok}
	if byCookie {
		a.CSRF = tok.CSRF
	}
	return c.JSON(http.StatusOK, a)
}

// signOut answers POST /api/v1/access/sign-out: the request's own token is
// revoked (a session ends, a phone leaves) and the cookie cleared.
func (s *Server) signOut(c echo.Context) error {
	if _, err := s.access.Revoke(tokenOf(c).ID); err != nil {
		return err
	}
	c.SetCookie(&http.Cookie{Name: SessionCookie, Value: "", Path: "/", MaxAge: -1, HttpOnly: true, SameSite: http.SameSiteStrictMode})
	return c.NoContent(http.StatusNoContent)
}

// listTokens answers GET /api/v1/access/tokens: every device, peer,
// session and script token, revoked ones too, newest first.
func (s *Server) listTokens(c echo.Context) error {
	list, err := s.access.Tokens()
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, map[string]any{"tokens": list})
}

// newTokenRequest is the body of POST /api/v1/access/tokens.
type newTokenRequest struct {
	Kind    access.Kind `json:"kind"`
	Label   string      `json:"label"`
	Studies []string    `json:"studies"`
}

// createToken answers POST /api/v1/access/tokens: a peer token (for the
// studies named) or a coordinator token for scripts. The token is in this
// answer only.
func (s *Server) createToken(c echo.Context) error {
	var req newTokenRequest
	if err := bindJSON(c, &req); err != nil {
		return err
	}
	if req.Kind != access.KindPeer && req.Kind != access.KindCoordinator {
		return badRequest("kind", "kind is \"peer\" (another tagtally server) or \"coordinator\" (a script); phones join with a join code")
	}
	secret, tok, err := s.access.Issue(access.NewToken{Kind: req.Kind, Label: req.Label, Studies: req.Studies, CreatedBy: tokenOf(c).Label})
	if err != nil {
		return err
	}
	c.Set(ctxAuditRecord, tok.ID)
	return c.JSON(http.StatusCreated, tokenAnswer{Secret: secret, Token: tok})
}

// revokeToken answers POST /api/v1/access/tokens/:id/revoke. The device's
// records already synced stay; its next request is refused.
func (s *Server) revokeToken(c echo.Context) error {
	tok, err := s.access.Revoke(c.Param("id"))
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, tok)
}

// joinCodeRequest is the body of POST .../join-codes.
type joinCodeRequest struct {
	Role access.Role `json:"role"`
}

// joinCodeAnswer is a new join code with the address a phone opens and
// that address as a QR code (PNG, base64 in JSON).
type joinCodeAnswer struct {
	*access.JoinCode
	URL string `json:"url"`
	QR  []byte `json:"qr_png"`
}

// createJoinCode answers POST /api/v1/studies/:study/join-codes.
func (s *Server) createJoinCode(c echo.Context) error {
	var req joinCodeRequest
	if err := bindJSON(c, &req); err != nil {
		return err
	}
	jc, err := s.access.NewJoinCode(c.Param("study"), req.Role, tokenOf(c).Label)
	if err != nil {
		return err
	}
	u := s.phoneBase(c) + "/#join=" + jc.Code
	png, err := qrcode.Encode(u, qrcode.Medium, 320)
	if err != nil {
		return err
	}
	return c.JSON(http.StatusCreated, joinCodeAnswer{JoinCode: jc, URL: u, QR: png})
}

// phoneBase is the address phones open: the configured one (the camp's
// HTTPS address) or, without it, the one this request came to.
func (s *Server) phoneBase(c echo.Context) string {
	if s.cfg.PhoneAddress != nil {
		if a := strings.TrimRight(s.cfg.PhoneAddress(), "/"); a != "" {
			return a
		}
	}
	return c.Scheme() + "://" + c.Request().Host
}

// newClaimLink answers POST /api/v1/access/claim-link with a new
// coordinator link (older unused links stop working): `tagtally access
// link` on this machine uses it while the server runs.
func (s *Server) newClaimLink(c echo.Context) error {
	code, err := s.access.NewClaim()
	if err != nil {
		return err
	}
	return c.JSON(http.StatusCreated, map[string]any{"url": ClaimURL(s.phoneBaseLocal(c), code), "expires": time.Now().Add(access.ClaimTTL).UTC()})
}

func (s *Server) phoneBaseLocal(c echo.Context) string {
	return c.Scheme() + "://" + c.Request().Host
}

// ClaimURL is the coordinator link for a claim code.
func ClaimURL(base, code string) string {
	return strings.TrimRight(base, "/") + "/coord/#claim=" + code
}

// auditLog answers GET /api/v1/access/audit?limit=&before=, newest first.
func (s *Server) auditLog(c echo.Context) error {
	limit, err := queryInt(c, "limit")
	if err != nil {
		return err
	}
	var before uint64
	if v := c.QueryParam("before"); v != "" {
		if before, err = strconv.ParseUint(v, 10, 64); err != nil {
			return badRequest("before", "before must be an entry's seq number, got %q", v)
		}
	}
	list, err := s.access.Audit(limit, before)
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, map[string]any{"entries": list})
}
