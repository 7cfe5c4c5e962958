package sync

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"reflect"
	"strings"
	"testing"
	"unicode"

	"tagtally/capture"
)

// decodePushReference is the push decoder as first written: one streaming
// encoding/json pass over the whole body, one revision after another. The
// faster DecodePush must decide every body the same way; the table test
// below and FuzzDecodePush compare them.
func decodePushReference(r io.Reader) (*PushBatch, error) {
	body, err := io.ReadAll(io.LimitReader(r, MaxPushBytes+1))
	if err != nil {
		return nil, fmt.Errorf("sync: push: reading body: %w", err)
	}
	if len(body) > MaxPushBytes {
		return nil, fmt.Errorf("sync: push: %w: more than %d bytes; send smaller batches", ErrTooLarge, MaxPushBytes)
	}
	// One pass over the body: each revision is decoded straight into a
	// Capture. A revision of the wrong shape (a number, a string where a
	// time belongs) is an error for that revision alone; broken JSON syntax
	// is an error for the body.
	b := &PushBatch{}
	dec := json.NewDecoder(bytes.NewReader(body))
	fail := func(format string, args ...any) (*PushBatch, error) {
		return nil, fmt.Errorf("sync: push: %w: body is not a push request: %s", ErrBadRevision, fmt.Sprintf(format, args...))
	}
	if tok, err := dec.Token(); err != nil || tok != json.Delim('{') {
		return fail("expected a JSON object")
	}
	for dec.More() {
		tok, err := dec.Token()
		if err != nil {
			return fail("%v", err)
		}
		switch tok {
		case "source":
			if err := dec.Decode(&b.Source); err != nil {
				return fail("source: %v", err)
			}
		case "revisions":
			tok, err := dec.Token()
			if err != nil || (tok != json.Delim('[') && tok != nil) {
				return fail("revisions must be an array")
			}
			if tok == nil {
				continue
			}
			for dec.More() {
				if len(b.Revisions) == MaxPushRevisions {
					return nil, fmt.Errorf("sync: push: %w: more than %d revisions; at most %d per push", ErrTooLarge, MaxPushRevisions, MaxPushRevisions)
				}
				c := new(capture.Capture)
				err := dec.Decode(c)
				var syn *json.SyntaxError
				switch {
				case errors.As(err, &syn), errors.Is(err, io.ErrUnexpectedEOF), errors.Is(err, io.EOF):
					return fail("%v", err)
				case err != nil:
					b.Revisions = append(b.Revisions, nil)
					b.Errors = append(b.Errors, fmt.Errorf("%w: revision %d does not decode: %v", ErrBadRevision, len(b.Revisions), err))
				default:
					b.Revisions = append(b.Revisions, c)
					b.Errors = append(b.Errors, nil)
				}
			}
			if _, err := dec.Token(); err != nil {
				return fail("%v", err)
			}
		default:
			var skip json.RawMessage
			if err := dec.Decode(&skip); err != nil {
				return fail("%v", err)
			}
		}
	}
	if _, err := dec.Token(); err != nil {
		return fail("%v", err)
	}
	if _, err := dec.Token(); !errors.Is(err, io.EOF) {
		return fail("data after the push request")
	}
	if len(b.Source) > maxDeviceLen {
		return nil, fmt.Errorf("sync: push: %w: source longer than %d bytes", ErrBadRevision, maxDeviceLen)
	}
	for _, c := range b.Source {
		if unicode.IsControl(c) || c == unicode.ReplacementChar {
			return nil, fmt.Errorf("sync: push: %w: source has a control or invalid character", ErrBadRevision)
		}
	}
	return b, nil
}

// sameDecode fails unless DecodePush and decodePushReference agree on data:
// both refuse it, for the same reason (too large or not a push), or both
// give the same source and the same revisions and per-revision errors.
func sameDecode(t *testing.T, data []byte) {
	t.Helper()
	got, gerr := DecodePush(bytes.NewReader(data))
	want, werr := decodePushReference(bytes.NewReader(data))
	if (gerr == nil) != (werr == nil) || errors.Is(gerr, ErrTooLarge) != errors.Is(werr, ErrTooLarge) || errors.Is(gerr, ErrBadRevision) != errors.Is(werr, ErrBadRevision) {
		t.Fatalf("body %.200q: error %v, reference %v", data, gerr, werr)
	}
	if gerr != nil {
		return
	}
	if got.Source != want.Source || len(got.Revisions) != len(want.Revisions) || len(got.Errors) != len(want.Errors) {
		t.Fatalf("body %.200q: source %q, %d revisions; reference %q, %d", data, got.Source, len(got.Revisions), want.Source, len(want.Revisions))
	}
	for i := range got.Revisions {
		if !reflect.DeepEqual(got.Revisions[i], want.Revisions[i]) || fmt.Sprint(got.Errors[i]) != fmt.Sprint(want.Errors[i]) {
			t.Fatalf("body %.200q: revision %d: %+v (%v), reference %+v (%v)", data, i+1, got.Revisions[i], got.Errors[i], want.Revisions[i], want.Errors[i])
		}
	}
}

// Bodies of every shape the decoder meets, small and large enough to be
// decoded on several cores, with broken and ill-typed revisions placed in
// the first and the last part.
func TestDecodePushMatchesReference(t *testing.T) {
	good := phoneRev(t, body("01890a5d-ac96-774b-bcce-b302099a8057", 1), nil, false, st(1000, "p"))
	gj, _ := json.Marshal(good)
	g := string(gj)
	list := func(n int, at map[int]string) string {
		parts := make([]string, n)
		for i := range parts {
			parts[i] = g
			if s, ok := at[i]; ok {
				parts[i] = s
			}
		}
		return strings.Join(parts, ",")
	}
	bodies := []string{
		``, ` `, `null`, `[]`, `{}`, ` { } `, `{"revisions":null}`, `{"revisions":[]}`, `{"revisions":{}}`, `{"revisions":"x"}`,
		`{"revisions":[]} x`, `{"revisions":[]}{}`, `{"revisions":[],}`, `{,}`, `{"source"}`, `{"source":}`, `{"source" "p"}`,
		`{"source":"p","source":"q"}`, `{"source":7}`, `{"source":null}`, `{"sou\u0072ce":"p"}`, `{"Source":"p"}`,
		`{"source":"p\u0000"}`, `{"source":"` + strings.Repeat("x", 200) + `"}`, "{\"source\":\"\xff\"}",
		`{"colour":[1,{"a":"]"}],"revisions":[` + g + `]}`, `{"colour":[1,2}` + `,"revisions":[]}`, `{"colour":tru}`,
		`{"revisions":[` + g + `],"revisions":[` + g + `]}`,
		`{"revisions":[` + g + `,]}`, `{"revisions":[,` + g + `]}`, `{"revisions":[` + g + ` ` + g + `]}`,
		`{"revisions":[{}, null, 1, "x", [], true, {"id":"01890a5d-ac96-774b-bcce-b302099a8057"}]}`,
		`{"revisions":[{"tag_id":5}, {"captured_at":"yesterday"}, {"mass_g":"heavy"}, {"revision":{"parents":"a"}}]}`,
		`{"revisions":[{"notes":"a \"quoted\" ] and } and \\ and \u00e9"}]}`,
		`{"revisions":[{"notes":"unterminated}]}`, `{"revisions":[{"notes":"x"}`, `{"revisions":[{"notes":"x"]}`,
		`{"revisions":[{"mass_g":1e999}]}`, `{"revisions":[{"mass_g":01}]}`, `{"revisions":[{"mass_g":-}]}`,
		"{\"revisions\":[{\"notes\":\"tab\there\"}]}", "\t{\n\"revisions\" :\r[ " + g + " ] }\n",
		`{"revisions":` + strings.Repeat("[", 10) + `}`,
		`{"revisions":[` + strings.Repeat("[", 9998) + strings.Repeat("]", 9998) + `]}`,
		`{"revisions":[` + strings.Repeat("[", 9999) + strings.Repeat("]", 9999) + `]}`,
		`{"x":` + strings.Repeat("[", 9999) + strings.Repeat("]", 9999) + `}`,
		`{"x":` + strings.Repeat("[", 10000) + strings.Repeat("]", 10000) + `}`,
		`{"source":"p","revisions":[` + list(300, nil) + `]}`,
		`{"source":"p","revisions":[` + list(300, map[int]string{3: `42`, 299: `{"tag_id":[]}`}) + `]}`,
		`{"source":"p","revisions":[` + list(300, map[int]string{280: `{"tag_id":"x",}`}) + `]}`,
		`{"source":"p","revisions":[` + list(300, map[int]string{10: `{"tag_id" "x"}`, 280: `{"tag_id":"x",}`}) + `]}`,
		`{"revisions":[` + list(MaxPushRevisions, nil) + `]}`,
		`{"revisions":[` + list(MaxPushRevisions+1, nil) + `]}`,
		`{"revisions":[` + list(MaxPushRevisions+1, map[int]string{5: `{"a":}`}) + `]}`,
		`{"revisions":[` + list(MaxPushRevisions+1, map[int]string{MaxPushRevisions: `{"a":}`}) + `]}`,
	}
	for _, b := range bodies {
		sameDecode(t, []byte(b))
	}
}
