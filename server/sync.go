package server

import (
	"fmt"
	"net/http"
	"strconv"
	"strings"
	stdsync "sync"
	"sync/atomic"

	"github.com/labstack/echo/v4"

	"tagtally/capture"
	"tagtally/server/access"
	tsync "tagtally/sync"
)

// syncState holds the sync engine of the server's store, opened on first
// use (Open reads the replica ID and decides the feed epoch).
type syncState struct {
	once   stdsync.Once
	opened atomic.Bool // set once the once has begun opening the engine
	eng    *tsync.Engine
	err    error
}

// engine returns the sync engine. Pushes use the store's Batch, so
// concurrent phones share commits (PERFORMANCE.md).
func (s *Server) engine() (*tsync.Engine, error) {
	s.sync.once.Do(func() {
		s.sync.opened.Store(true)
		s.sync.eng, s.sync.err = tsync.Open(s.store, &tsync.Options{Batch: true})
		if s.sync.err != nil {
			return
		}
		s.log.Info("sync", "replica", s.sync.eng.Replica(), "epoch", s.sync.eng.Epoch(), "note", s.sync.eng.EpochNote)
		// Records written before sync started (demo data, imports) get
		// their first revisions, so phones and peers see them.
		n, err := s.sync.eng.Adopt()
		if err != nil {
			s.sync.err = err
			return
		}
		if n > 0 {
			s.log.Info("sync: versioned records written without sync", "revisions", n)
		}
	})
	return s.sync.eng, s.sync.err
}

// CloseSync closes the sync engine if it was opened, which writes its
// feed mark to disk (sync.Engine.Close). Call it after Serve has returned
// and the scheduled peer sync has stopped, before closing the store.
func (s *Server) CloseSync() error {
	if !s.sync.opened.Load() {
		return nil // never opened: nothing to close, and nothing to open now
	}
	// Waits for an opening still under way. An engine whose Adopt failed
	// is open all the same and is closed too.
	_, _ = s.engine()
	if s.sync.eng == nil {
		return nil // it failed to open: nothing to close
	}
	return s.sync.eng.Close()
}

// SyncEngine returns the server's sync engine, for the scheduled peer sync
// of `tagtally serve`.
func (s *Server) SyncEngine() (*tsync.Engine, error) { return s.engine() }

// syncInfo answers GET /api/v1/sync: this replica's ID and feed epoch.
func (s *Server) syncInfo(c echo.Context) error {
	eng, err := s.engine()
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, map[string]string{"replica": eng.Replica(), "epoch": eng.Epoch()})
}

// syncPush answers POST /api/v1/sync/push with a status per revision, after
// the commit. A bad revision is rejected alone; a body over the limits or
// not of the push form is refused whole.
func (s *Server) syncPush(c echo.Context) error {
	eng, err := s.engine()
	if err != nil {
		return err
	}
	batch, err := tsync.DecodePush(c.Request().Body) // a body over the limit wraps *http.MaxBytesError
	if err != nil {
		return err
	}
	batch.Restrict(tokenOf(c).Allows)
	reply, err := eng.Push(batch)
	if err != nil {
		return err
	}
	for _, r := range reply.Results {
		if r.Warning != "" {
			s.log.Warn("sync push", "source", batch.Source, "capture", r.CaptureID, "revision", r.Revision, "warning", r.Warning)
		}
	}
	return c.JSON(http.StatusOK, reply)
}

// syncPull answers GET /api/v1/sync/pull?cursor=&study=&skip_source=&limit=
// with one page of the change feed.
func (s *Server) syncPull(c echo.Context) error {
	eng, err := s.engine()
	if err != nil {
		return err
	}
	req := tsync.PullRequest{Cursor: c.QueryParam("cursor"), Study: c.QueryParam("study"), SkipSource: c.QueryParam("skip_source")}
	if v := c.QueryParam("limit"); v != "" {
		n, err := strconv.Atoi(v)
		if err != nil || n < 1 || n > tsync.MaxPullLimit {
			return badRequest("limit", "limit must be a whole number from 1 to %d", tsync.MaxPullLimit)
		}
		req.Limit = n
	}
	if err := scopePull(tokenOf(c), &req); err != nil {
		return err
	}
	page, err := eng.Pull(req)
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, page)
}

// captureHistory answers GET .../captures/:id/history: every revision of
// the record ever accepted, its leaves and its provisional winner.
func (s *Server) captureHistory(c echo.Context) error {
	eng, err := s.engine()
	if err != nil {
		return err
	}
	h, err := eng.History(c.Param("study"), c.Param("id"))
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, h)
}

// resolveRequest is the body of POST .../captures/:id/resolve. Leaves are
// the leaf revision IDs the coordinator looked at (the history's leaves);
// Capture is the chosen body, or null to keep the provisional winner's;
// Deleted resolves the record as deleted.
type resolveRequest struct {
	Leaves  []string         `json:"leaves"`
	Capture *capture.Capture `json:"capture"`
	Deleted bool             `json:"deleted"`
}

// resolveCapture answers POST .../captures/:id/resolve with the stored
// resolution; 409 when the leaves changed since the coordinator read them.
func (s *Server) resolveCapture(c echo.Context) error {
	eng, err := s.engine()
	if err != nil {
		return err
	}
	var req resolveRequest
	if err := bindJSON(c, &req); err != nil {
		return err
	}
	if len(req.Leaves) == 0 {
		return badRequest("leaves", "name the leaf revisions being resolved (from the record's history)")
	}
	body := req.Capture
	if req.Deleted {
		if body == nil {
			h, err := eng.History(c.Param("study"), c.Param("id"))
			if err != nil {
				return err
			}
			for _, r := range h.Revisions {
				if r.Revision.ID == h.Winner {
					body = &r
				}
			}
		}
		body.Revision.Deleted = true
	}
	rec, fs, err := eng.Resolve(c.Param("study"), c.Param("id"), body, req.Leaves)
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, captureAnswer{rec, orEmpty(fs)})
}

// peerRequest is the body of POST /api/v1/sync/peer.
type peerRequest struct {
	URL      string `json:"url"`
	Token    string `json:"token"`
	Study    string `json:"study"`
	PageSize int    `json:"page_size"`
}

// syncWithPeer answers POST /api/v1/sync/peer: this server pulls from and
// pushes to another tagtally server now, resuming from its stored
// checkpoints, and answers with what moved. `tagtally sync --server` uses
// it when this server holds the data file. Like the backup download, its
// rule admits only a coordinator on this machine: it makes the server
// contact an address the caller chooses.
func (s *Server) syncWithPeer(c echo.Context) error {
	eng, err := s.engine()
	if err != nil {
		return err
	}
	var req peerRequest
	if err := bindJSON(c, &req); err != nil {
		return err
	}
	if req.URL == "" {
		return badRequest("url", "give the peer's base URL, e.g. http://10.0.0.2:8080")
	}
	rep, err := eng.SyncPeer(c.Request().Context(), tsync.Peer{URL: req.URL, Token: req.Token, Study: req.Study, PageSize: req.PageSize})
	if err != nil {
		return err // tsync.ErrPeer: 502
	}
	return c.JSON(http.StatusOK, rep)
}

// scopePull keeps a pull within the token's studies: a study outside them
// is refused, and a pull of all studies gets only the token's.
func scopePull(tok *access.Token, req *tsync.PullRequest) error {
	if tok.AllStudies() {
		return nil
	}
	if req.Study != "" && !tok.Allows(req.Study) {
		return fmt.Errorf("%w: this token is for study %s, not %q", access.ErrDenied, strings.Join(tok.Studies, ", "), req.Study)
	}
	req.Studies = tok.Studies
	return nil
}
