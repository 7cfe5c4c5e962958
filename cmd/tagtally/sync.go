package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net/http"
	"os"
	"os/signal"
	"strings"
	"syscall"
	"time"

	tsync "tagtally/sync"
)

const syncHelp = `
Syncs this tagtally with another tagtally server (for example base camp
with the program office): it fetches every record revision the other
server has that this one lacks, then sends every revision this one has
that the other lacks. No edit is lost: records edited on both sides are
kept as a conflict for the coordinator to resolve.

It resumes where the last run stopped, so an interrupted sync can simply
be run again. Run it where the data file is. If "tagtally serve" is
running with the file, give --server (this machine's server address) and
the running server does the sync.

With --every, it repeats on that interval until stopped with Ctrl+C.`

func runSync(args []string, stdout io.Writer) error {
	cfg, err := defaultConfig()
	if err != nil {
		return err
	}
	fs := newFlagSet("sync", "tagtally sync --peer URL [--token T] [--data PATH | --server URL] [options]", syncHelp)
	fs.SetOutput(stdout)
	cfg.addDataFlag(fs)
	peer := fs.String("peer", "", "base URL of the other tagtally server, e.g. http://10.0.0.2:8080 (required)")
	token := fs.String("token", os.Getenv("TAGTALLY_PEER_TOKEN"), "the peer token the other server's coordinator made for this one (Access page, or tagtally access token --kind peer there; environment: TAGTALLY_PEER_TOKEN)")
	study := fs.String("study", "", "sync only this study (default: all)")
	page := fs.Int("page", tsync.DefaultPullLimit, "revisions per request")
	via := fs.String("server", "", "address of the tagtally server running on this machine that holds the data file, e.g. http://127.0.0.1:8080")
	every := fs.Duration("every", 0, "repeat at this interval (e.g. 15m) until stopped; 0 syncs once")
	asJSON := fs.Bool("json", false, "print the report as JSON")
	if err := parseArgs(fs, args, 0); err != nil {
		return err
	}
	if *peer == "" {
		return fmt.Errorf("%w: --peer is required", errUsage)
	}
	if *page < 1 || *page > tsync.MaxPushRevisions {
		return fmt.Errorf("%w: --page must be from 1 to %d", errUsage, tsync.MaxPushRevisions)
	}
	if *every < 0 {
		return fmt.Errorf("%w: --every must not be negative", errUsage)
	}
	p := tsync.Peer{URL: *peer, Token: *token, Study: *study, PageSize: *page}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	once := func() (*tsync.PeerReport, error) {
		if *via != "" {
			return syncThroughServer(ctx, cfg.Data, *via, p)
		}
		return syncDataFile(ctx, cfg.Data, p)
	}
	for {
		rep, err := once()
		if err != nil {
			if *every == 0 {
				return err
			}
			fmt.Fprintf(stdout, "%s sync with %s failed (will retry): %v\n", time.Now().Format(time.TimeOnly), p.URL, err)
		} else {
			printSyncReport(stdout, p.URL, rep, *asJSON)
		}
		if *every == 0 {
			return nil
		}
		select {
		case <-ctx.Done():
			return nil
		case <-time.After(*every):
		}
	}
}

// syncDataFile opens the data file and syncs it with the peer.
func syncDataFile(ctx context.Context, data string, p tsync.Peer) (rep *tsync.PeerReport, err error) {
	store, err := openStore(data)
	if errors.Is(err, errInUse) {
		return nil, fmt.Errorf("%w; give --server with its address to sync through it", err)
	}
	if err != nil {
		return nil, err
	}
	defer func() {
		if cerr := store.Close(); cerr != nil && err == nil {
			err = cerr
		}
	}()
	eng, err := tsync.Open(store, nil)
	if err != nil {
		return nil, err
	}
	defer func() {
		if cerr := eng.Close(); cerr != nil && err == nil {
			err = cerr
		}
	}()
	return eng.SyncPeer(ctx, p)
}

// syncThroughServer asks the server running on this machine to sync.
func syncThroughServer(ctx context.Context, dataFile, server string, p tsync.Peer) (*tsync.PeerReport, error) {
	body, _ := json.Marshal(map[string]any{"url": p.URL, "token": p.Token, "study": p.Study, "page_size": p.PageSize})
	req, err := localRequest(dataFile, http.MethodPost, strings.TrimRight(server, "/")+"/api/v1/sync/peer", bytes.NewReader(body))
	if err != nil {
		return nil, err
	}
	req = req.WithContext(ctx)
	req.Header.Set("Content-Type", "application/json")
	resp, err := (&http.Client{Timeout: 10 * time.Minute}).Do(req)
	if err != nil {
		return nil, fmt.Errorf("asking the server at %s: %w", server, err)
	}
	defer resp.Body.Close()
	data, err := io.ReadAll(io.LimitReader(resp.Body, 1<<20))
	if err != nil {
		return nil, err
	}
	if resp.StatusCode != http.StatusOK {
		return nil, fmt.Errorf("the server at %s answered %s: %s", server, resp.Status, strings.TrimSpace(string(data)))
	}
	var rep tsync.PeerReport
	if err := json.Unmarshal(data, &rep); err != nil {
		return nil, fmt.Errorf("the server at %s answered something unreadable: %w", server, err)
	}
	return &rep, nil
}

func printSyncReport(w io.Writer, peer string, rep *tsync.PeerReport, asJSON bool) {
	if asJSON {
		json.NewEncoder(w).Encode(rep)
		return
	}
	fmt.Fprintf(w, "%s synced with %s (replica %s)\n", time.Now().Format(time.TimeOnly), peer, rep.PeerReplica)
	if rep.FullResync {
		fmt.Fprintln(w, "  the other server's change feed was restarted (restored from a backup?): everything was compared again")
	}
	fmt.Fprintf(w, "  received %d revisions, %d new here\n", rep.Pulled, rep.PulledStored)
	fmt.Fprintf(w, "  sent %d revisions, %d new there\n", rep.Pushed, rep.PushedStored)
	if rep.Rejected > 0 {
		fmt.Fprintf(w, "  %d revisions refused; they stay here and are not sent again:\n", rep.Rejected)
		for _, r := range rep.RejectedReason {
			fmt.Fprintln(w, "   ", r)
		}
	}
}

// startPeerSync runs a peer sync every interval in the background until
// ctx ends, logging each result: the scheduled mode for `tagtally serve`
// (eng is the server's engine, from server.Server.SyncEngine). The
// returned channel is closed when the loop has stopped; close the store only
// after that.
func startPeerSync(ctx context.Context, eng *tsync.Engine, p tsync.Peer, every time.Duration, log *slog.Logger) <-chan struct{} {
	done := make(chan struct{})
	go func() {
		defer close(done)
		for {
			rep, err := eng.SyncPeer(ctx, p)
			if err != nil {
				log.Warn("peer sync failed; will retry", "peer", p.URL, "err", err)
			} else {
				log.Info("peer sync", "peer", p.URL, "received", rep.Pulled, "new_here", rep.PulledStored, "sent", rep.Pushed, "new_there", rep.PushedStored, "refused", rep.Rejected)
			}
			select {
			case <-ctx.Done():
				return
			case <-time.After(every):
			}
		}
	}()
	return done
}
