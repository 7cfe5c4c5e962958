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
	var req PushRequest
	dec := json.NewDecoder(bytes.NewReader(body))
	if err := dec.Decode(&req); err != nil {
		return nil, fmt.Errorf("sync: push: %w: body is not a push request: %v", ErrBadRevision, err)
	}
	if _, err := dec.Token(); !errors.Is(err, io.EOF) {
		return nil, fmt.Errorf("sync: push: %w: data after the push request", ErrBadRevision)
	}
	if len(req.Revisions) > MaxPushRevisions {
		return nil, fmt.Errorf("sync: push: %w: %d revisions, at most %d per push", ErrTooLarge, len(req.Revisions), MaxPushRevisions)
	}
	if len(req.Source) > maxDeviceLen {
		return nil, fmt.Errorf("sync: push: %w: source longer than %d bytes", ErrBadRevision, maxDeviceLen)
	}
	for _, c := range req.Source {
		if unicode.IsControl(c) || c == unicode.ReplacementChar {
			return nil, fmt.Errorf("sync: push: %w: source has a control or invalid character", ErrBadRevision)
		}
	}
	b := &PushBatch{Source: req.Source, Revisions: make([]*capture.Capture, len(req.Revisions)), Errors: make([]error, len(req.Revisions))}
	for i, raw := range req.Revisions {
		c := new(capture.Capture)
		if err := json.Unmarshal(raw, c); err != nil {
			b.Errors[i] = fmt.Errorf("%w: revision %d does not decode: %v", ErrBadRevision, i+1, err)
			continue
		}
		b.Revisions[i] = c
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
