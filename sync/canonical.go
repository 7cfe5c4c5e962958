package sync

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"math"
	"reflect"
	"slices"
	"strconv"
	"strings"
	stdsync "sync"
	"time"
	"unicode/utf8"

	"tagtally/capture"
)

// Canonical body of a capture, the part of a revision's identity that is
// the record itself. It is defined so that any language can produce it
// byte for byte (the phone app computes revision IDs offline):
//
//   - the capture as a JSON object, without its "revision" member;
//   - members whose value is empty are left out: "", 0, false, null, [] and
//     {} (an object all of whose members were left out is itself empty);
//     array elements are never left out;
//   - object members in byte order of their names; no whitespace;
//   - strings escaped as JSON.stringify does: \" \\ \b \f \n \r \t, other
//     characters below U+0020 as \u00XX in lower-case hex, everything else
//     literal (UTF-8);
//   - numbers as JSON.stringify prints an IEEE double (shortest round-trip
//     form, exponent form below 1e-6 and from 1e21 on; -0 is 0);
//   - times (captured_at) in UTC as RFC 3339 with the fractional seconds'
//     trailing zeros removed, e.g. "2026-05-01T06:30:00.25Z".
//
// Canonicalisation goes through the Go struct, so a member the struct does
// not know is dropped on the server before the ID is checked: a client
// sending fields this server does not know gets its revision rejected with
// ErrRevisionID rather than silently losing the field.

// RevisionID returns the ID of the revision with the given parents, deleted
// flag and body (c's Revision field is ignored):
//
//	first 32 hex digits of SHA-256("tagtally revision 1\n" +
//	    parents sorted bytewise, joined by "," + "\n" +
//	    ("1" if deleted else "0") + "\n" + canonical body)
//
// 128 bits make an accidental collision practically impossible for any
// number of records a study will see. Parents must not repeat.
func RevisionID(c *capture.Capture, parents []string, deleted bool) (string, error) {
	body, err := CanonicalBody(c)
	if err != nil {
		return "", err
	}
	return revisionID(body, parents, deleted), nil
}

func revisionID(body []byte, parents []string, deleted bool) string {
	ps := slices.Clone(parents)
	slices.Sort(ps)
	h := sha256.New()
	h.Write([]byte("tagtally revision 1\n"))
	h.Write([]byte(strings.Join(ps, ",")))
	if deleted {
		h.Write([]byte("\n1\n"))
	} else {
		h.Write([]byte("\n0\n"))
	}
	h.Write(body)
	var sum [sha256.Size]byte
	return hex.EncodeToString(h.Sum(sum[:0])[:16])
}

// CanonicalBody returns the canonical JSON of c without its revision
// metadata (see the package documentation for the rules). It fails with
// ErrBadRevision on a non-finite number or invalid UTF-8.
func CanonicalBody(c *capture.Capture) ([]byte, error) {
	v := reflect.ValueOf(c).Elem()
	var e canonEncoder
	e.buf = make([]byte, 0, 512)
	if !e.value(v, true) {
		e.buf = append(e.buf, "{}"...)
	}
	if e.err != nil {
		return nil, e.err
	}
	return e.buf, nil
}

type canonEncoder struct {
	buf []byte
	err error
}

var timeType = reflect.TypeFor[time.Time]()

type canonField struct {
	name  string
	index int
}

var fieldPlans stdsync.Map // reflect.Type -> []canonField

// plan lists a struct's JSON members in byte order of their names.
func plan(t reflect.Type) []canonField {
	if p, ok := fieldPlans.Load(t); ok {
		return p.([]canonField)
	}
	var fs []canonField
	for i := 0; i < t.NumField(); i++ {
		f := t.Field(i)
		if !f.IsExported() {
			continue
		}
		name := f.Name
		if tag, ok := f.Tag.Lookup("json"); ok {
			n, _, _ := strings.Cut(tag, ",")
			if n == "-" {
				continue
			}
			if n != "" {
				name = n
			}
		}
		fs = append(fs, canonField{name, i})
	}
	slices.SortFunc(fs, func(a, b canonField) int { return strings.Compare(a.name, b.name) })
	fieldPlans.Store(t, fs)
	return fs
}

// value appends v's canonical JSON unless v is empty; it reports whether it
// wrote anything. top marks the capture itself, whose "revision" member is
// left out.
func (e *canonEncoder) value(v reflect.Value, top bool) bool {
	if e.err != nil {
		return false
	}
	switch v.Kind() {
	case reflect.Pointer, reflect.Interface:
		if v.IsNil() {
			return false
		}
		return e.value(v.Elem(), false)
	case reflect.String:
		if v.Len() == 0 {
			return false
		}
		e.str(v.String())
		return true
	case reflect.Bool:
		if !v.Bool() {
			return false
		}
		e.buf = append(e.buf, "true"...)
		return true
	case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64:
		if v.Int() == 0 {
			return false
		}
		e.buf = strconv.AppendInt(e.buf, v.Int(), 10)
		return true
	case reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64:
		if v.Uint() == 0 {
			return false
		}
		e.buf = strconv.AppendUint(e.buf, v.Uint(), 10)
		return true
	case reflect.Float32, reflect.Float64:
		f := v.Float()
		if math.IsNaN(f) || math.IsInf(f, 0) {
			e.err = fmt.Errorf("%w: a number is not finite", ErrBadRevision)
			return false
		}
		if f == 0 {
			return false
		}
		e.buf = appendNumber(e.buf, f)
		return true
	case reflect.Slice, reflect.Array:
		if v.Len() == 0 {
			return false
		}
		e.buf = append(e.buf, '[')
		for i := 0; i < v.Len(); i++ {
			if i > 0 {
				e.buf = append(e.buf, ',')
			}
			if !e.value(v.Index(i), false) {
				e.buf = append(e.buf, emptyOf(v.Index(i))...)
			}
		}
		e.buf = append(e.buf, ']')
		return true
	case reflect.Map:
		if v.Len() == 0 || v.Type().Key().Kind() != reflect.String {
			if v.Len() != 0 {
				e.err = fmt.Errorf("%w: map with non-string keys", ErrBadRevision)
			}
			return false
		}
		keys := v.MapKeys()
		slices.SortFunc(keys, func(a, b reflect.Value) int { return strings.Compare(a.String(), b.String()) })
		start := len(e.buf)
		e.buf = append(e.buf, '{')
		n := 0
		for _, k := range keys {
			mark := len(e.buf)
			if n > 0 {
				e.buf = append(e.buf, ',')
			}
			e.str(k.String())
			e.buf = append(e.buf, ':')
			if e.value(v.MapIndex(k), false) {
				n++
			} else {
				e.buf = e.buf[:mark]
			}
		}
		if n == 0 {
			e.buf = e.buf[:start]
			return false
		}
		e.buf = append(e.buf, '}')
		return true
	case reflect.Struct:
		if v.Type() == timeType {
			t := v.Interface().(time.Time)
			e.str(t.UTC().Format(time.RFC3339Nano))
			return true
		}
		start := len(e.buf)
		e.buf = append(e.buf, '{')
		n := 0
		for _, f := range plan(v.Type()) {
			if top && f.name == "revision" {
				continue
			}
			mark := len(e.buf)
			if n > 0 {
				e.buf = append(e.buf, ',')
			}
			e.str(f.name)
			e.buf = append(e.buf, ':')
			if e.value(v.Field(f.index), false) {
				n++
			} else {
				e.buf = e.buf[:mark]
			}
		}
		if n == 0 {
			e.buf = e.buf[:start]
			return false
		}
		e.buf = append(e.buf, '}')
		return true
	default:
		e.err = fmt.Errorf("%w: field of kind %s cannot be canonicalised", ErrBadRevision, v.Kind())
		return false
	}
}

// emptyOf is what an empty array element is written as.
func emptyOf(v reflect.Value) string {
	for v.Kind() == reflect.Pointer || v.Kind() == reflect.Interface {
		if v.IsNil() {
			return "null"
		}
		v = v.Elem()
	}
	switch v.Kind() {
	case reflect.String:
		return `""`
	case reflect.Bool:
		return "false"
	case reflect.Slice, reflect.Array:
		return "[]"
	case reflect.Map, reflect.Struct:
		return "{}"
	default:
		return "0"
	}
}

const hexDigits = "0123456789abcdef"

// str appends s as JSON.stringify would.
func (e *canonEncoder) str(s string) {
	if !utf8.ValidString(s) {
		e.err = fmt.Errorf("%w: text is not valid UTF-8", ErrBadRevision)
		return
	}
	e.buf = append(e.buf, '"')
	for i := 0; i < len(s); i++ {
		c := s[i]
		switch {
		case c == '"':
			e.buf = append(e.buf, '\\', '"')
		case c == '\\':
			e.buf = append(e.buf, '\\', '\\')
		case c >= 0x20:
			e.buf = append(e.buf, c)
		case c == '\b':
			e.buf = append(e.buf, '\\', 'b')
		case c == '\f':
			e.buf = append(e.buf, '\\', 'f')
		case c == '\n':
			e.buf = append(e.buf, '\\', 'n')
		case c == '\r':
			e.buf = append(e.buf, '\\', 'r')
		case c == '\t':
			e.buf = append(e.buf, '\\', 't')
		default:
			e.buf = append(e.buf, '\\', 'u', '0', '0', hexDigits[c>>4], hexDigits[c&0xf])
		}
	}
	e.buf = append(e.buf, '"')
}

// appendNumber formats f as ECMAScript's Number::toString does (the same
// rule encoding/json uses for float64): shortest round-trip digits, plain
// notation for 1e-6 <= |f| < 1e21, otherwise exponent form like "1e+21".
func appendNumber(b []byte, f float64) []byte {
	abs := math.Abs(f)
	if abs != 0 && (abs < 1e-6 || abs >= 1e21) {
		b = strconv.AppendFloat(b, f, 'e', -1, 64)
		// Go writes e-07 / e+21 style exponents with at least two digits;
		// ECMAScript writes e-7 / e+21.
		n := len(b)
		if n >= 4 && b[n-4] == 'e' && b[n-2] == '0' {
			b[n-2] = b[n-1]
			b = b[:n-1]
		}
		return b
	}
	return strconv.AppendFloat(b, f, 'f', -1, 64)
}
