package access

import (
	"sync"
	"time"
)

// Limits bound code exchanges (claim and join attempts): at most PerClient
// attempts from one network address and Overall attempts from all
// addresses together in each Window.
type Limits struct {
	PerClient int
	Overall   int
	Window    time.Duration
}

// DefaultLimits let a crew enrol a dozen phones in a minute (a typo or two
// each) while guessing a 60-bit join code stays hopeless: 60 attempts a
// minute is under 2^17 a day.
var DefaultLimits = Limits{PerClient: 10, Overall: 60, Window: time.Minute}

// Limiter counts attempts in fixed windows. It is memory only: a restart
// forgets the counts, which costs an attacker a server restart each time.
type Limiter struct {
	lim Limits
	now func() time.Time

	mu      sync.Mutex
	start   time.Time // of the current window
	overall int
	clients map[string]int
}

// NewLimiter makes a limiter.
func NewLimiter(l Limits) *Limiter {
	return &Limiter{lim: l, now: time.Now, clients: map[string]int{}}
}

// SetClock replaces the clock (tests).
func (l *Limiter) SetClock(now func() time.Time) {
	l.mu.Lock()
	l.now = now
	l.mu.Unlock()
}

// Allow counts an attempt from client and reports whether it is within
// the limits; when it is not, it also returns how long until the window
// ends. A refused attempt counts too, so hammering does not help.
func (l *Limiter) Allow(client string) (bool, time.Duration) {
	l.mu.Lock()
	defer l.mu.Unlock()
	now := l.now()
	if now.Sub(l.start) >= l.lim.Window || now.Before(l.start) {
		l.start, l.overall = now, 0
		clear(l.clients)
	}
	wait := l.lim.Window - now.Sub(l.start)
	l.clients[client]++
	if l.clients[client] > l.lim.PerClient {
		return false, wait
	}
	// Only attempts within their client's limit count overall, so one
	// address hammering cannot lock every phone out.
	l.overall++
	if l.overall > l.lim.Overall {
		return false, wait
	}
	return true, 0
}
