package server

import (
	"bytes"
	"encoding/json"
	"errors"
	"io"
	"mime"
	"net/http"
	"reflect"
	"strconv"
	"strings"
	"unicode/utf8"

	"github.com/labstack/echo/v4"
)

// bindJSON decodes the request body into v strictly: the body must be one
// JSON value with no unknown fields and nothing after it. Failures are
// requestErrors (400), except a body over the limit (413).
func bindJSON(c echo.Context, v any) error {
	r := c.Request()
	if ct := r.Header.Get(echo.HeaderContentType); ct != "" {
		if mt, _, err := mime.ParseMediaType(ct); err != nil || mt != echo.MIMEApplicationJSON {
			return badRequest("", "send JSON with Content-Type: application/json (got %q)", ct)
		}
	}
	// Read the whole (size-limited) body first: encoding/json would turn
	// invalid UTF-8 into U+FFFD without a word, changing what was sent.
	body, err := io.ReadAll(r.Body)
	if err != nil {
		var mbe *http.MaxBytesError
		if errors.As(err, &mbe) {
			return err
		}
		return badRequest("", "the request body could not be read: %v", err)
	}
	if !utf8.Valid(body) {
		return badRequest("", "the body is not valid UTF-8 text (at byte %d); send JSON in UTF-8", invalidUTF8At(body))
	}
	dec := json.NewDecoder(bytes.NewReader(body))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		return decodeError(err)
	}
	if _, err := dec.Token(); !errors.Is(err, io.EOF) {
		var mbe *http.MaxBytesError
		if errors.As(err, &mbe) {
			return err
		}
		return badRequest("", "the body has more after the JSON value; send exactly one JSON value")
	}
	return nil
}

// invalidUTF8At is the offset of the first byte that is not UTF-8.
func invalidUTF8At(b []byte) int {
	for i := 0; i < len(b); {
		r, n := utf8.DecodeRune(b[i:])
		if r == utf8.RuneError && n == 1 {
			return i
		}
		i += n
	}
	return len(b)
}

func decodeError(err error) error {
	var (
		syn *json.SyntaxError
		typ *json.UnmarshalTypeError
		mbe *http.MaxBytesError
	)
	switch {
	case errors.As(err, &mbe):
		return err
	case errors.Is(err, io.EOF):
		return badRequest("", "the request body is empty; send a JSON object")
	case errors.Is(err, io.ErrUnexpectedEOF):
		return badRequest("", "the JSON body ends too early")
	case errors.As(err, &syn):
		return badRequest("", "malformed JSON at byte %d: %v", syn.Offset, syn)
	case errors.As(err, &typ):
		return badRequest(typ.Field, "field %q must be a JSON %s, not %s", typ.Field, jsonKind(typ.Type.Kind()), typ.Value)
	}
	if f, ok := strings.CutPrefix(err.Error(), "json: unknown field "); ok {
		f, _ = strconv.Unquote(f)
		return badRequest(f, "unknown field %q", f)
	}
	return badRequest("", "the JSON body could not be read: %v", err)
}

// queryInt reads an optional non-negative integer query parameter.
func queryInt(c echo.Context, name string) (int, error) {
	s := c.QueryParam(name)
	if s == "" {
		return 0, nil
	}
	n, err := strconv.Atoi(s)
	if err != nil || n < 0 {
		return 0, badRequest(name, "query parameter %s must be a whole number, 0 or more; got %q", name, s)
	}
	return n, nil
}

// jsonKind names a Go kind the way JSON does, for error messages.
func jsonKind(k reflect.Kind) string {
	switch k {
	case reflect.Slice, reflect.Array:
		return "array"
	case reflect.Map, reflect.Struct:
		return "object"
	case reflect.Bool:
		return "true or false"
	case reflect.String:
		return "string"
	case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64,
		reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64:
		return "whole number"
	case reflect.Float32, reflect.Float64:
		return "number"
	}
	return k.String()
}
