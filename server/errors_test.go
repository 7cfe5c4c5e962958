package server

import (
	"errors"
	"fmt"
	"net/http"
	"testing"

	"tagtally/capture"
	tsync "tagtally/sync"
)

// status is the one place that chooses statuses; sync's sentinels,
// wrapped as the sync package wraps them, get theirs there. A failing
// peer's details stay out of the answer.
func TestStatusOfSyncErrors(t *testing.T) {
	for _, c := range []struct {
		err      error
		code     int
		showsMsg bool
	}{
		{fmt.Errorf("sync: push: %w: more than 1000 revisions", tsync.ErrTooLarge), http.StatusRequestEntityTooLarge, true},
		{fmt.Errorf("sync: pull: %w: %q", tsync.ErrBadCursor, "x"), http.StatusBadRequest, true},
		{fmt.Errorf("sync: push: %w: body is not a push request", tsync.ErrBadRevision), http.StatusBadRequest, true},
		{fmt.Errorf("sync: capture 1: %w: its leaves are a, b", tsync.ErrStaleLeaves), http.StatusConflict, true},
		{fmt.Errorf("sync: capture 1: %w", tsync.ErrMissingParent), http.StatusConflict, true},
		{fmt.Errorf("sync: GET http://10.0.0.2/: %w: HTTP 500: secret detail", tsync.ErrPeer), http.StatusBadGateway, false},
		// A sync sentinel decides before a store one it is joined with.
		{errors.Join(fmt.Errorf("sync: %w", tsync.ErrStaleLeaves), capture.ErrNotFound), http.StatusConflict, true},
		{fmt.Errorf("sync: %w", capture.ErrNotFound), http.StatusNotFound, true},
		{fmt.Errorf("sync: push: reading body: %w", &http.MaxBytesError{Limit: 4096}), http.StatusRequestEntityTooLarge, false},
	} {
		code, body := status(c.err)
		if code != c.code {
			t.Errorf("%v: status %d, want %d", c.err, code, c.code)
		}
		if shows := body.Error == c.err.Error(); shows != c.showsMsg {
			t.Errorf("%v: answer %q (shows the error: %v, want %v)", c.err, body.Error, shows, c.showsMsg)
		}
	}
}
