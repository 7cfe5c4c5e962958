package sync

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"net/url"
	"strconv"
	"strings"
	"time"

	"tagtally/capture"
)

// Peer is another tagtally server this one syncs with, over the same
// endpoints phones use.
type Peer struct {
	// URL is the peer's base URL, e.g. "https://10.0.0.2:8443".
	URL string
	// Token is sent as "Authorization: Bearer TOKEN".
	Token string
	// Name keys the stored checkpoints; empty means URL.
	Name string
	// Study limits the sync to one study; "" syncs all.
	Study string
	// PageSize is the number of revisions per pull page and push batch
	// (DefaultPullLimit when 0; at most MaxPushRevisions).
	PageSize int
	// Client makes the requests; nil means a client with a 60 s timeout.
	Client *http.Client
}

// PeerCheckpoint is what a replica remembers about one peer. Pulled is
// written in the same transaction as the revisions it covers; Pushed only
// after the peer has confirmed (committed) them. Neither can be ahead of
// its data.
type PeerCheckpoint struct {
	PeerReplica string `json:"peer_replica"`
	PeerEpoch   string `json:"peer_epoch"`
	// Pulled is the cursor into the peer's feed.
	Pulled string `json:"pulled"`
	// LocalEpoch and Pushed: this replica's feed position (in its epoch)
	// up to which the peer confirmed every revision.
	LocalEpoch string `json:"local_epoch"`
	Pushed     uint64 `json:"pushed"`
}

// PeerReport sums up one SyncPeer run.
type PeerReport struct {
	PeerReplica string `json:"peer_replica"`
	PeerEpoch   string `json:"peer_epoch"`
	// FullResync: the peer's epoch changed (it was restored from a backup
	// or replaced), so this run started over in both directions.
	FullResync     bool     `json:"full_resync"`
	Pulled         int      `json:"pulled"`
	PulledStored   int      `json:"pulled_stored"`
	Pushed         int      `json:"pushed"`
	PushedStored   int      `json:"pushed_stored"`
	Rejected       int      `json:"rejected"`
	RejectedReason []string `json:"rejected_reasons,omitempty"` // the first few
}

func (p *Peer) name() string {
	if p.Name != "" {
		return p.Name
	}
	return p.URL
}

// PeerCheckpoint returns the stored checkpoint for a peer name (zero when
// there is none).
func (e *Engine) PeerCheckpoint(name string) (PeerCheckpoint, error) {
	var cp PeerCheckpoint
	err := e.b.view(func(t txn) error {
		var err error
		cp, err = getCheckpoint(t, name)
		return err
	})
	return cp, err
}

func getCheckpoint(t txn, name string) (PeerCheckpoint, error) {
	var cp PeerCheckpoint
	v, err := t.getMeta("peer:" + name)
	if err != nil || v == nil {
		return cp, err
	}
	if err := json.Unmarshal(v, &cp); err != nil {
		return PeerCheckpoint{}, nil // unreadable: start over, which is safe
	}
	return cp, nil
}

func putCheckpoint(t txn, name string, cp PeerCheckpoint) error {
	v, err := json.Marshal(cp)
	if err != nil {
		return err
	}
	return t.putMeta("peer:"+name, v)
}

// SyncPeer pulls everything new from the peer, then pushes everything new
// here to it, page by page, storing checkpoints as it goes; an interrupted
// run resumes where the last confirmed page ended. It returns what it
// moved. Revisions the peer rejects for good are counted, not retried; a
// revision rejected for now (a missing parent) stops the run with an error
// without moving the checkpoint past it.
func (e *Engine) SyncPeer(ctx context.Context, p Peer) (*PeerReport, error) {
	if _, err := url.Parse(p.URL); err != nil || p.URL == "" {
		return nil, fmt.Errorf("sync: peer URL %q: %w", p.URL, ErrPeer)
	}
	base := strings.TrimRight(p.URL, "/")
	size := p.PageSize
	if size <= 0 {
		size = DefaultPullLimit
	}
	size = min(size, MaxPushRevisions)
	client := p.Client
	if client == nil {
		client = &http.Client{Timeout: 60 * time.Second}
	}
	rep := &PeerReport{}
	name := p.name()
	if _, err := e.Adopt(); err != nil {
		return rep, err
	}
	reject := func(r Result) {
		rep.Rejected++
		if len(rep.RejectedReason) < 10 {
			rep.RejectedReason = append(rep.RejectedReason, r.CaptureID+" "+r.Revision+": "+r.Reason)
		}
	}

	// Pull.
	for {
		cp, err := e.PeerCheckpoint(name)
		if err != nil {
			return rep, err
		}
		q := url.Values{"limit": {strconv.Itoa(size)}, "skip_source": {e.replica}}
		if cp.Pulled != "" {
			q.Set("cursor", cp.Pulled)
		}
		if p.Study != "" {
			q.Set("study", p.Study)
		}
		var page PullPage
		if err := e.call(ctx, client, http.MethodGet, base+"/api/v1/sync/pull?"+q.Encode(), p.Token, nil, &page); err != nil {
			return rep, err
		}
		if page.Epoch == "" || page.Replica == "" {
			return rep, fmt.Errorf("sync: pull from %s: %w: reply has no epoch or replica", base, ErrPeer)
		}
		if ep, _, err := ParseCursor(page.Next); err != nil || ep != page.Epoch {
			return rep, fmt.Errorf("sync: pull from %s: %w: bad next cursor %q", base, ErrPeer, page.Next)
		}
		rep.PeerReplica, rep.PeerEpoch = page.Replica, page.Epoch
		if cp.PeerEpoch != "" && cp.PeerEpoch != page.Epoch {
			rep.FullResync = true
		}
		res, retry, err := e.applyPage(name, cp.Pulled, &page)
		if err != nil {
			return rep, err
		}
		fault("after-pull-commit")
		rep.Pulled += len(res)
		for _, r := range res {
			switch {
			case r.Status == StatusStored:
				rep.PulledStored++
			case r.Status == StatusRejected:
				reject(r)
			}
		}
		if retry {
			return rep, fmt.Errorf("sync: pull from %s: %w: a pulled revision's parent is missing; run again", base, ErrPeer)
		}
		if !page.More {
			break
		}
	}

	// Push.
	for {
		cp, err := e.PeerCheckpoint(name)
		if err != nil {
			return rep, err
		}
		local, after, through, err := e.outbox(cp, p.Study, size)
		if err != nil {
			return rep, err
		}
		if len(local.Revisions) > 0 {
			body, err := json.Marshal(PushRequest{Source: e.replica, Revisions: local.Revisions})
			if err != nil {
				return rep, err
			}
			var reply PushReply
			if err := e.call(ctx, client, http.MethodPost, base+"/api/v1/sync/push", p.Token, body, &reply); err != nil {
				return rep, err
			}
			if len(reply.Results) != len(local.Revisions) {
				return rep, fmt.Errorf("sync: push to %s: %w: %d results for %d revisions", base, ErrPeer, len(reply.Results), len(local.Revisions))
			}
			rep.Pushed += len(reply.Results)
			for _, r := range reply.Results {
				switch {
				case r.Status == StatusStored:
					rep.PushedStored++
				case r.Status == StatusAlreadyHad:
				case r.Retry:
					return rep, fmt.Errorf("sync: push to %s: %w: revision %s rejected for now (%s); run again", base, ErrPeer, r.Revision, r.Reason)
				default:
					reject(r)
				}
			}
			fault("before-push-checkpoint")
		}
		if err := e.confirmPushed(name, after, through); err != nil {
			return rep, err
		}
		if !local.More {
			return rep, nil
		}
	}
}

// applyPage stores a pulled page and, in the same transaction, moves the
// peer's pull cursor from `from` to page.Next, unless the stored cursor is
// no longer `from` (a stale or repeated page: its revisions are still
// applied, which is harmless). A revision rejected for now (retry) keeps
// the cursor where it is. A new peer epoch resets the push checkpoint: the
// peer may have lost what was pushed to it.
func (e *Engine) applyPage(name, from string, page *PullPage) ([]Result, bool, error) {
	revs := make([]*capture.Capture, len(page.Revisions))
	for i, raw := range page.Revisions {
		c := new(capture.Capture)
		if err := json.Unmarshal(raw, c); err == nil {
			revs[i] = c
		}
	}
	retry := false
	res, err := e.apply(revs, page.Replica, false, func(t txn, res []Result) error {
		for _, r := range res {
			if r.Status == StatusRejected && r.Retry {
				retry = true
				return nil
			}
		}
		cp, err := getCheckpoint(t, name)
		if err != nil {
			return err
		}
		if cp.Pulled != from {
			return nil
		}
		if cp.PeerEpoch != page.Epoch {
			cp.Pushed = 0
		}
		cp.PeerReplica, cp.PeerEpoch, cp.Pulled = page.Replica, page.Epoch, page.Next
		return putCheckpoint(t, name, cp)
	})
	return res, retry, err
}

// outbox returns the next page of this replica's feed to push to the peer
// of checkpoint cp (leaving out what came from that peer), the position it
// starts after and the position it covers through.
func (e *Engine) outbox(cp PeerCheckpoint, study string, size int) (*PullPage, uint64, uint64, error) {
	after := cp.Pushed
	if cp.LocalEpoch != e.epoch {
		after = 0
	}
	page, err := e.Pull(PullRequest{Cursor: FormatCursor(e.epoch, after), Study: study, SkipSource: cp.PeerReplica, Limit: size})
	if err != nil {
		return nil, 0, 0, err
	}
	_, through, err := ParseCursor(page.Next)
	return page, after, through, err
}

// confirmPushed moves the push checkpoint from `from` to through, after
// the peer confirmed every revision in between; a checkpoint that moved
// meanwhile is left alone.
func (e *Engine) confirmPushed(name string, from, through uint64) error {
	err := e.b.update(func(t txn) error {
		cp, err := getCheckpoint(t, name)
		if err != nil {
			return err
		}
		cur := cp.Pushed
		if cp.LocalEpoch != e.epoch {
			cur = 0
		}
		if cur != from || (through == cur && cp.LocalEpoch == e.epoch) {
			return nil
		}
		cp.LocalEpoch, cp.Pushed = e.epoch, through
		return putCheckpoint(t, name, cp)
	})
	if err != nil {
		return fmt.Errorf("sync: push checkpoint: %w", err)
	}
	return nil
}

// call makes one request and decodes a JSON reply into out.
func (e *Engine) call(ctx context.Context, client *http.Client, method, u, token string, body []byte, out any) error {
	var rd io.Reader
	if body != nil {
		rd = bytes.NewReader(body)
	}
	req, err := http.NewRequestWithContext(ctx, method, u, rd)
	if err != nil {
		return fmt.Errorf("sync: %s %s: %w", method, u, err)
	}
	if body != nil {
		req.Header.Set("Content-Type", "application/json")
	}
	req.Header.Set("Accept", "application/json")
	if token != "" {
		req.Header.Set("Authorization", "Bearer "+token)
	}
	resp, err := client.Do(req)
	if err != nil {
		return fmt.Errorf("sync: %s %s: %w", method, u, err)
	}
	defer resp.Body.Close()
	data, err := io.ReadAll(io.LimitReader(resp.Body, 64<<20))
	if err != nil {
		return fmt.Errorf("sync: %s %s: reading reply: %w", method, u, err)
	}
	if resp.StatusCode != http.StatusOK {
		msg := strings.TrimSpace(string(data))
		if len(msg) > 300 {
			msg = msg[:300] + "..."
		}
		return fmt.Errorf("sync: %s %s: %w: HTTP %d: %s", method, u, ErrPeer, resp.StatusCode, msg)
	}
	if err := json.Unmarshal(data, out); err != nil {
		return fmt.Errorf("sync: %s %s: %w: unreadable reply: %v", method, u, ErrPeer, err)
	}
	return nil
}
