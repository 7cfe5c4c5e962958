package sync

import (
	"os"
	"strconv"
	"strings"
	stdsync "sync"
	"sync/atomic"
	"syscall"
)

// Fault injection for the crash tests. When the environment variable
// TAGTALLY_SYNC_FAULT is "POINT" or "POINT:N", the process kills itself
// with SIGKILL the first (or Nth) time it reaches that point, exactly as
// a power cut or an out-of-memory kill would stop it. Points:
//
//	after-push-commit       a push is committed, its reply not yet sent
//	before-push-checkpoint  a peer confirmed a push, the pusher's
//	                        checkpoint is not yet written
//	after-pull-commit       a pulled page and its cursor are committed
//
// Unset (always, outside tests) it costs one atomic load.
var (
	faultOnce  stdsync.Once
	faultPoint string
	faultAt    int64
	faultHits  atomic.Int64
)

func fault(point string) {
	faultOnce.Do(func() {
		v := os.Getenv("TAGTALLY_SYNC_FAULT")
		p, n, _ := strings.Cut(v, ":")
		faultPoint, faultAt = p, 1
		if k, err := strconv.ParseInt(n, 10, 64); err == nil && k > 0 {
			faultAt = k
		}
	})
	if faultPoint == "" || faultPoint != point {
		return
	}
	if faultHits.Add(1) == faultAt {
		_ = syscall.Kill(os.Getpid(), syscall.SIGKILL)
		select {} // the signal is on its way
	}
}
