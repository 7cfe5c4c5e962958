package sync

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
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
// object of the PushRequest form, or names a bad source; a revision that
// does not decode as a capture is reported in PushBatch.Errors and the
// others are kept. It never panics on any input.
func DecodePush(r io.Reader) (*PushBatch, error) {
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
