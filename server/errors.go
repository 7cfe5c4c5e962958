package server

import (
	"context"
	"errors"
	"fmt"
	"net/http"

	"github.com/labstack/echo/v4"

	"tagtally/capture"
	"tagtally/server/access"
	tsync "tagtally/sync"
)

// errorBody is the JSON body of every error answer. Field names the JSON
// field at fault (e.g. "tag_id" or "occasions[2].end") when there is one.
type errorBody struct {
	Error string `json:"error"`
	Field string `json:"field,omitempty"`
}

// requestError is a request the server could not read: malformed JSON, an
// unknown field, a bad query parameter. It is answered with 400.
type requestError struct {
	field string
	msg   string
}

func (e *requestError) Error() string { return e.msg }

func badRequest(field, format string, args ...any) error {
	return &requestError{field: field, msg: fmt.Sprintf(format, args...)}
}

// status chooses the HTTP status and the client-facing body for err. It is
// the only place where errors become statuses.
func status(err error) (int, errorBody) {
	var (
		ve  *capture.ValidationError
		re  *requestError
		mbe *http.MaxBytesError
		he  *echo.HTTPError
	)
	switch {
	case errors.As(err, &mbe):
		return http.StatusRequestEntityTooLarge, errorBody{Error: fmt.Sprintf("request body is larger than the limit of %d bytes", mbe.Limit)}
	case errors.Is(err, access.ErrNoCredentials):
		return http.StatusUnauthorized, errorBody{Error: "sign in first: phones join with a code from the coordinator; the coordinator opens the link that tagtally serve prints (or runs tagtally access link)"}
	case errors.Is(err, access.ErrBadToken):
		return http.StatusUnauthorized, errorBody{Error: "this access token was revoked or is not known here: ask the coordinator for a new join code (records waiting on a phone stay there)"}
	case errors.Is(err, access.ErrBadCode):
		return http.StatusUnauthorized, errorBody{Error: "this code does not work: it may be mistyped, already used or expired; ask the coordinator for a new one"}
	case errors.Is(err, access.ErrTooManyAttempts):
		return http.StatusTooManyRequests, errorBody{Error: "too many attempts from here; wait a minute and try again"}
	case errors.Is(err, access.ErrDenied):
		return http.StatusForbidden, errorBody{Error: err.Error()}
	case errors.Is(err, access.ErrInvalid):
		return http.StatusUnprocessableEntity, errorBody{Error: err.Error()}
	case errors.As(err, &re):
		return http.StatusBadRequest, errorBody{Error: re.msg, Field: re.field}
	// Sync's sentinels come before the store's: a sync error names the
	// revision or cursor at fault.
	case errors.Is(err, tsync.ErrTooLarge):
		return http.StatusRequestEntityTooLarge, errorBody{Error: err.Error()}
	case errors.Is(err, tsync.ErrBadCursor), errors.Is(err, tsync.ErrBadRevision):
		return http.StatusBadRequest, errorBody{Error: err.Error()}
	case errors.Is(err, tsync.ErrStaleLeaves), errors.Is(err, tsync.ErrMissingParent):
		return http.StatusConflict, errorBody{Error: err.Error()}
	case errors.Is(err, tsync.ErrPeer):
		// The peer's answer goes to the log, not to the client.
		return http.StatusBadGateway, errorBody{Error: http.StatusText(http.StatusBadGateway)}
	case errors.As(err, &ve):
		return http.StatusUnprocessableEntity, errorBody{Error: ve.Message, Field: ve.Field}
	case errors.Is(err, capture.ErrInvalid):
		return http.StatusUnprocessableEntity, errorBody{Error: err.Error()}
	case errors.Is(err, capture.ErrNotFound):
		return http.StatusNotFound, errorBody{Error: err.Error()}
	case errors.Is(err, capture.ErrConflict):
		return http.StatusConflict, errorBody{Error: err.Error()}
	case errors.Is(err, context.DeadlineExceeded):
		return http.StatusServiceUnavailable, errorBody{Error: "the request took too long; try again"}
	case errors.As(err, &he):
		if he.Code == http.StatusRequestEntityTooLarge || he.Code < 500 {
			msg := http.StatusText(he.Code)
			if he.Code == http.StatusNotFound {
				msg = "no such endpoint; GET /api/v1 lists them"
			} else if m, ok := he.Message.(string); ok {
				msg = m
			}
			return he.Code, errorBody{Error: msg}
		}
		return he.Code, errorBody{Error: http.StatusText(he.Code)}
	}
	return http.StatusInternalServerError, errorBody{Error: "internal error; the details are in the server log"}
}

// handleError is echo's HTTPErrorHandler: it answers every failed request
// with errorBody and logs server-side failures with their details.
func (s *Server) handleError(err error, c echo.Context) {
	code, body := status(err)
	if code >= 500 {
		s.log.Error("request failed", "method", c.Request().Method, "path", c.Request().URL.Path, "status", code, "err", err)
	}
	if c.Response().Committed {
		return
	}
	if c.Request().Method == http.MethodHead {
		err = c.NoContent(code)
	} else {
		err = c.JSON(code, body)
	}
	if err != nil {
		s.log.Warn("writing error answer", "err", err)
	}
}
