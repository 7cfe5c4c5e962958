package sync

import (
	"fmt"
	stdsync "sync"
	"time"
)

// Stamp is a hybrid logical clock reading (Kulkarni, Demirbas, Madappa,
// Avva and Leone 2014, "Logical physical clocks", OPODIS): Wall is the
// largest physical time seen, in Unix milliseconds, and Logical counts
// events within one Wall value. Device names the replica that made the
// stamp; it only breaks ties between equal (Wall, Logical) pairs.
//
// Stamps order revisions for display ("last changed") and for choosing the
// provisional winner among concurrent leaves. They never decide whether an
// edit is kept: ancestry does that. A device whose clock is wrong by years
// still has every edit kept; only the order of its concurrent edits against
// others' is affected.
type Stamp struct {
	Wall    int64  // Unix milliseconds, 0 <= Wall < 2^48
	Logical uint32 // events within the same Wall
	Device  string // replica that made the stamp; may be empty
}

// maxWall is the largest Wall a stamp can encode (12 hex digits, about the
// year 10889).
const maxWall = 1<<48 - 1

// String encodes the stamp so that byte order is stamp order: 12 lower-case
// hex digits of Wall, 8 of Logical, then "-" and the device if there is one,
// e.g. "018c1a2b3c4d00000002-phone-7".
func (s Stamp) String() string {
	if s.Device == "" {
		return fmt.Sprintf("%012x%08x", s.Wall, s.Logical)
	}
	return fmt.Sprintf("%012x%08x-%s", s.Wall, s.Logical, s.Device)
}

// Time is Wall as a time.Time (UTC).
func (s Stamp) Time() time.Time { return time.UnixMilli(s.Wall).UTC() }

// Before reports whether s orders before t: by Wall, Logical, then Device.
func (s Stamp) Before(t Stamp) bool {
	if s.Wall != t.Wall {
		return s.Wall < t.Wall
	}
	if s.Logical != t.Logical {
		return s.Logical < t.Logical
	}
	return s.Device < t.Device
}

// ParseStamp decodes a stamp made by Stamp.String. It accepts only the
// exact form (lower-case hex, no sign), so that equal stamps have equal
// strings and string order is stamp order.
func ParseStamp(s string) (Stamp, error) {
	if len(s) < 20 {
		return Stamp{}, fmt.Errorf("%w: stamp %q is shorter than 20 characters", ErrBadStamp, s)
	}
	var st Stamp
	for i := 0; i < 20; i++ {
		c := s[i]
		var d byte
		switch {
		case c >= '0' && c <= '9':
			d = c - '0'
		case c >= 'a' && c <= 'f':
			d = c - 'a' + 10
		default:
			return Stamp{}, fmt.Errorf("%w: stamp %q: character %d is not a lower-case hex digit", ErrBadStamp, s, i+1)
		}
		if i < 12 {
			st.Wall = st.Wall<<4 | int64(d)
		} else {
			st.Logical = st.Logical<<4 | uint32(d)
		}
	}
	if rest := s[20:]; rest != "" {
		if rest[0] != '-' || len(rest) == 1 {
			return Stamp{}, fmt.Errorf("%w: stamp %q: expected \"-device\" after the 20 hex digits", ErrBadStamp, s)
		}
		st.Device = rest[1:]
		if len(st.Device) > maxDeviceLen {
			return Stamp{}, fmt.Errorf("%w: stamp %q: device name longer than %d bytes", ErrBadStamp, s, maxDeviceLen)
		}
		for _, r := range st.Device {
			if r < 0x20 || r == 0x7f {
				return Stamp{}, fmt.Errorf("%w: stamp %q: device name has a control character", ErrBadStamp, s)
			}
		}
	}
	return st, nil
}

const maxDeviceLen = 128

// DefaultMaxAhead is how far ahead of the local clock a received stamp may
// be before the clock refuses to follow it.
const DefaultMaxAhead = 24 * time.Hour

// Clock is a hybrid logical clock. It is safe for concurrent use.
//
// Send rule (Now): l' = max(l, pt); c' = c+1 if l' = l, else 0.
// Receive rule (Observe of a remote (lm, cm)): l' = max(l, lm, pt);
// c' = max(c, cm)+1 if l' = l = lm; c+1 if l' = l; cm+1 if l' = lm; else 0.
// (Kulkarni et al. 2014, Figure 5.)
//
// A remote stamp more than MaxAhead ahead of the physical clock is clamped:
// the clock follows it only up to pt + MaxAhead, so one phone set to the
// wrong year cannot drag every later stamp on the server into the future.
// The remote stamp itself is not changed (revisions keep the stamp their
// author gave them, so that every replica orders them the same way); the
// caller reports the clamp.
type Clock struct {
	mu       stdsync.Mutex
	now      func() time.Time
	device   string
	maxAhead time.Duration
	wall     int64
	logical  uint32
}

// NewClock makes a clock for device reading physical time from now
// (time.Now when nil), refusing to follow stamps more than maxAhead into
// the future (DefaultMaxAhead when <= 0).
func NewClock(device string, now func() time.Time, maxAhead time.Duration) *Clock {
	if now == nil {
		now = time.Now
	}
	if maxAhead <= 0 {
		maxAhead = DefaultMaxAhead
	}
	return &Clock{now: now, device: device, maxAhead: maxAhead}
}

func (c *Clock) physical() int64 {
	pt := c.now().UnixMilli()
	if pt < 0 {
		pt = 0
	}
	if pt > maxWall {
		pt = maxWall
	}
	return pt
}

// Now returns a new stamp for a local event (the send rule). Stamps from
// one clock strictly increase.
func (c *Clock) Now() Stamp {
	c.mu.Lock()
	defer c.mu.Unlock()
	pt := c.physical()
	if pt > c.wall {
		c.wall, c.logical = pt, 0
	} else {
		c.bump()
	}
	return Stamp{Wall: c.wall, Logical: c.logical, Device: c.device}
}

// bump increments the logical counter; on the (practically unreachable)
// overflow it moves Wall on by one millisecond instead, which keeps stamps
// increasing.
func (c *Clock) bump() {
	if c.logical == ^uint32(0) {
		c.wall++
		c.logical = 0
		return
	}
	c.logical++
}

// Observe merges a received stamp into the clock (the receive rule). It
// returns how far ahead of the physical clock the stamp was when that is
// more than MaxAhead (the stamp was clamped), else 0.
func (c *Clock) Observe(r Stamp) (ahead time.Duration) {
	c.mu.Lock()
	defer c.mu.Unlock()
	pt := c.physical()
	lm, cm := r.Wall, r.Logical
	if limit := pt + c.maxAhead.Milliseconds(); lm > limit {
		ahead = time.Duration(lm-pt) * time.Millisecond
		lm, cm = limit, 0
	}
	l := max(c.wall, lm, pt)
	switch {
	case l == c.wall && l == lm:
		c.logical = max(c.logical, cm)
		c.bump()
	case l == c.wall:
		c.bump()
	case l == lm:
		c.wall, c.logical = lm, cm
		c.bump()
	default:
		c.wall, c.logical = l, 0
	}
	return ahead
}

// Last returns the clock's current reading without advancing it.
func (c *Clock) Last() Stamp {
	c.mu.Lock()
	defer c.mu.Unlock()
	return Stamp{Wall: c.wall, Logical: c.logical, Device: c.device}
}
