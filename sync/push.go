package sync

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"slices"
	stdsync "sync"
	"unicode"

	"tagtally/capture"
)

// Push limits. A phone's outbox is sent in batches of at most
// MaxPushRevisions revisions and MaxPushBytes bytes of JSON.
const (
	MaxPushRevisions = 1000
	MaxPushBytes     = 4 << 20
)

// PushRequest is the body of POST /api/v1/sync/push.
type PushRequest struct {
	// Source is the sender's device or replica ID (at most 128 bytes). It
	// is remembered with each revision stored, so that the sender's own
	// revisions are not sent back to it when it pulls.
	Source    string            `json:"source"`
	Revisions []json.RawMessage `json:"revisions"`
}

// PushReply answers a push, sent only after the revisions are committed.
// Results are in the order of the request's revisions.
type PushReply struct {
	Replica string   `json:"replica"`
	Epoch   string   `json:"epoch"`
	Results []Result `json:"results"`
}

// PushBatch is a decoded push: Revisions[i] is nil when revision i did not
// decode, with the reason in Errors[i].
type PushBatch struct {
	Source    string
	Revisions []*capture.Capture
	Errors    []error
}

// DecodePush reads a push body. It fails as a whole (ErrTooLarge,
// ErrBadRevision) only when the body is over the limits, is not a JSON
// object of the PushRequest form (broken JSON anywhere in it included), or
// names a bad source; a revision that is valid JSON but does not decode as
// a capture (a number, a string where a time belongs) is reported in
// PushBatch.Errors and the others are kept. Members other than "source"
// and "revisions" are ignored; a repeated "revisions" adds its elements. It
// never panics on any input.
//
// How: one pass over the body finds where each revision's JSON begins and
// ends (splitPush, which checks the push object's own syntax), then the
// revisions are decoded on all cores (parallelChunks) by
// decodeRevisionJSON, which checks their syntax. Decoding with
// encoding/json alone was the largest part of a push's CPU time (about
// 2 ms for 500 revisions on one core, PERFORMANCE.md).
func DecodePush(r io.Reader) (*PushBatch, error) {
	body, err := io.ReadAll(io.LimitReader(r, MaxPushBytes+1))
	if err != nil {
		return nil, fmt.Errorf("sync: push: reading body: %w", err)
	}
	if len(body) > MaxPushBytes {
		return nil, fmt.Errorf("sync: push: %w: more than %d bytes; send smaller batches", ErrTooLarge, MaxPushBytes)
	}
	b := &PushBatch{}
	spans, err := splitPush(body, &b.Source)
	if err != nil {
		return nil, err
	}
	revs := make([]*capture.Capture, len(spans))
	errs := make([]error, len(spans))
	var (
		mu    stdsync.Mutex
		first = len(spans) // the first chunk with broken JSON
		ferr  error
	)
	if len(spans) > 0 {
		parallelChunks(len(spans), func(lo, hi int) {
			for i := lo; i < hi; i++ {
				var err error
				if revs[i], errs[i], err = decodeRevisionJSON(body[spans[i].start:spans[i].end]); err != nil {
					mu.Lock()
					if i < first {
						first, ferr = i, err
					}
					mu.Unlock()
					return
				}
			}
		})
	}
	if ferr != nil {
		return nil, ferr
	}
	for i, err := range errs {
		if err != nil {
			errs[i] = fmt.Errorf("%w: revision %d does not decode: %v", ErrBadRevision, i+1, err)
		}
	}
	b.Revisions, b.Errors = revs, errs
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

func badPush(format string, args ...any) error {
	return fmt.Errorf("sync: push: %w: body is not a push request: %s", ErrBadRevision, fmt.Sprintf(format, args...))
}

// decodeRevisionJSON decodes one element of the revisions array as
// splitPush found it: with decodeCaptureFast when it can, else with
// encoding/json's streaming decoder, as the whole body used to be read. A
// revision of the wrong shape gives a revision error (the revision is
// rejected alone); broken JSON an error for the whole body.
func decodeRevisionJSON(text []byte) (c *capture.Capture, revErr, bodyErr error) {
	c = new(capture.Capture)
	if decodeCaptureFast(text, c) {
		return c, nil, nil
	}
	c = new(capture.Capture)
	dec := json.NewDecoder(bytes.NewReader(text))
	err := dec.Decode(c)
	var syn *json.SyntaxError
	switch {
	case errors.As(err, &syn), errors.Is(err, io.ErrUnexpectedEOF), errors.Is(err, io.EOF):
		return nil, nil, badPush("%v", err)
	case dec.InputOffset() != int64(len(text)):
		// More after one value (00, say): in the array that is a missing
		// comma, broken JSON.
		return nil, nil, badPush("revision is not one JSON value")
	case err != nil:
		return nil, err, nil
	}
	return c, nil, nil
}

// span is where a revision is in a body: body[start:end].
type span struct{ start, end int }

// splitPush reads the push object in body: it decodes "source" into
// source, checks other members' values are valid JSON, and returns where
// the elements of "revisions" are in body, unchecked (each is a whole
// JSON value if it is valid JSON at all; decodeRevisionJSON checks that).
func splitPush(body []byte, source *string) ([]span, error) {
	p := jsonSpan{b: body}
	var raws []span
	if !p.eat('{') {
		return nil, badPush("expected a JSON object")
	}
	if !p.eat('}') {
		for {
			key, ok := p.value()
			var k string
			if !ok || key[0] != '"' || json.Unmarshal(key, &k) != nil {
				return nil, badPush("expected a member name at byte %d", p.i)
			}
			if !p.eat(':') {
				return nil, badPush("expected ':' at byte %d", p.i)
			}
			switch k {
			case "revisions":
				if p.eat('[') {
					if !p.eat(']') {
						for {
							if len(raws) == MaxPushRevisions {
								if i := slices.IndexFunc(raws, func(r span) bool { return !json.Valid(body[r.start:r.end]) }); i >= 0 {
									return nil, badPush("revision %d is not valid JSON", i+1)
								}
								return nil, fmt.Errorf("sync: push: %w: more than %d revisions; at most %d per push", ErrTooLarge, MaxPushRevisions, MaxPushRevisions)
							}
							p.space()
							start := p.i
							if _, ok := p.value(); !ok {
								return nil, badPush("revision %d: unexpected end or character at byte %d", len(raws)+1, p.i)
							}
							raws = append(raws, span{start, p.i})
							if p.eat(',') {
								continue
							}
							if p.eat(']') {
								break
							}
							return nil, badPush("expected ',' or ']' at byte %d", p.i)
						}
					}
					break
				}
				if v, ok := p.value(); ok && string(v) == "null" {
					break
				}
				return nil, badPush("revisions must be an array")
			case "source":
				v, ok := p.value()
				if !ok {
					return nil, badPush("source: unexpected end or character at byte %d", p.i)
				}
				if err := json.Unmarshal(v, source); err != nil {
					return nil, badPush("source: %v", err)
				}
			default:
				if v, ok := p.value(); !ok || !json.Valid(v) {
					return nil, badPush("member %q: not a JSON value", k)
				}
			}
			if p.eat(',') {
				continue
			}
			if p.eat('}') {
				break
			}
			return nil, badPush("expected ',' or '}' at byte %d", p.i)
		}
	}
	p.space()
	if p.i != len(body) {
		return nil, badPush("data after the push request")
	}
	return raws, nil
}

// jsonSpan walks JSON text finding where values begin and end, without
// decoding them.
type jsonSpan struct {
	b []byte
	i int
}

func (p *jsonSpan) space() {
	for p.i < len(p.b) {
		switch p.b[p.i] {
		case ' ', '\t', '\n', '\r':
			p.i++
		default:
			return
		}
	}
}

// eat skips white space, then c if it is next.
func (p *jsonSpan) eat(c byte) bool {
	p.space()
	if p.i < len(p.b) && p.b[p.i] == c {
		p.i++
		return true
	}
	return false
}

// value skips white space and returns the extent of the value that starts
// there: a string to its closing quote, an object or array to the bracket
// that closes it (brackets inside strings do not count), anything else to
// the next white space or delimiter. It does not check the value's syntax:
// a wrong extent is never valid JSON, which the caller's decoding finds.
// ok is false when the text ends inside the value or no value starts here.
func (p *jsonSpan) value() (v []byte, ok bool) {
	p.space()
	start := p.i
	if p.i == len(p.b) {
		return nil, false
	}
	switch p.b[p.i] {
	case '"':
		if !p.skipString() {
			return nil, false
		}
	case '{', '[':
		depth := 0
		for p.i < len(p.b) {
			switch p.b[p.i] {
			case '"':
				if !p.skipString() {
					return nil, false
				}
				continue
			case '{', '[':
				depth++
			case '}', ']':
				depth--
			}
			p.i++
			if depth == 0 {
				return p.b[start:p.i], true
			}
		}
		return nil, false
	case ',', ':', '}', ']':
		return nil, false
	default:
		for p.i < len(p.b) {
			switch p.b[p.i] {
			case ' ', '\t', '\n', '\r', ',', ':', '{', '}', '[', ']', '"':
				return p.b[start:p.i], true
			}
			p.i++
		}
	}
	return p.b[start:p.i], true
}

// skipString moves past the string starting at p.i (a quote); false if
// the text ends first.
func (p *jsonSpan) skipString() bool {
	for p.i++; p.i < len(p.b); p.i++ {
		switch p.b[p.i] {
		case '\\':
			p.i++
		case '"':
			p.i++
			return true
		}
	}
	return false
}

// Push applies a decoded push (see ApplyRemote) and returns the reply to
// send. Revisions that did not decode are rejected with their reason.
func (e *Engine) Push(b *PushBatch) (*PushReply, error) {
	res, err := e.ApplyRemote(b.Revisions, b.Source)
	if err != nil {
		return nil, err
	}
	for i, derr := range b.Errors {
		if derr != nil {
			res[i] = Result{Status: StatusRejected, Reason: derr.Error()}
		}
	}
	return &PushReply{Replica: e.replica, Epoch: e.epoch, Results: res}, nil
}
