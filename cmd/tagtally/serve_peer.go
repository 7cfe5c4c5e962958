package main

import (
	"context"
	"flag"
	"fmt"
	"log/slog"
	"net/url"
	"os"
	"time"

	"tagtally/server"
	tsync "tagtally/sync"
)

// peerSchedule is the scheduled peer sync of `tagtally serve`: while the
// server runs, it syncs its data file with another tagtally server (base
// camp with the program office) at start and then every Every, through
// the server's own sync engine, so phones keep pushing and pulling while
// it runs. The zero value (no URL) syncs with nobody.
type peerSchedule struct {
	// URL is the other server's base URL; "" turns the schedule off.
	URL string
	// Token is sent to the other server as a bearer token.
	Token string
	// Every is the pause between the end of one sync and the start of the
	// next.
	Every time.Duration
}

const defaultPeerEvery = 15 * time.Minute

// addFlags puts the schedule's options on serve's flag set; the token's
// default comes from the environment, as for `tagtally sync`.
func (p *peerSchedule) addFlags(fs *flag.FlagSet) {
	fs.StringVar(&p.URL, "sync-peer", p.URL, "also sync with this other tagtally server while serving, e.g. http://10.0.0.2:8080 (at start, then every --sync-every)")
	fs.StringVar(&p.Token, "sync-token", os.Getenv("TAGTALLY_PEER_TOKEN"), "access token for the --sync-peer server (environment: TAGTALLY_PEER_TOKEN)")
	fs.DurationVar(&p.Every, "sync-every", defaultPeerEvery, "pause between two syncs with --sync-peer")
}

// validate checks the schedule once, with the rest of the configuration.
func (p *peerSchedule) validate() error {
	if p.URL == "" {
		return nil
	}
	u, err := url.Parse(p.URL)
	if err != nil || (u.Scheme != "http" && u.Scheme != "https") || u.Host == "" {
		return fmt.Errorf("%w: --sync-peer %q is not an http:// or https:// address", errUsage, p.URL)
	}
	if p.Every <= 0 {
		return fmt.Errorf("%w: --sync-every must be more than 0", errUsage)
	}
	return nil
}

// start begins the schedule on srv's sync engine. The returned stop ends
// it and waits for a sync in progress to give up, so the caller may close
// the store afterwards; call it before closing the store.
func (p *peerSchedule) start(ctx context.Context, srv *server.Server) (stop func(), err error) {
	if p.URL == "" {
		return func() {}, nil
	}
	eng, err := srv.SyncEngine()
	if err != nil {
		return nil, err
	}
	ctx, cancel := context.WithCancel(ctx)
	done := startPeerSync(ctx, eng, tsync.Peer{URL: p.URL, Token: p.Token}, p.Every, slog.Default())
	return func() { cancel(); <-done }, nil
}
