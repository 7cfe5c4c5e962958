package sync

import (
	"errors"
	"math/rand/v2"
	"sort"
	"testing"
	"time"
)

type fakeTime struct{ t time.Time }

func (f *fakeTime) now() time.Time { return f.t }

func TestStampStringOrderIsStampOrder(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	devs := []string{"", "a", "b", "phone-10", "phone-9"}
	var ss []Stamp
	for i := 0; i < 2000; i++ {
		ss = append(ss, Stamp{Wall: rng.Int64N(maxWall + 1), Logical: rng.Uint32N(4), Device: devs[rng.IntN(len(devs))]})
		if i%3 == 0 { // many equal walls
			ss[i].Wall = 1700000000000
		}
	}
	for _, s := range ss {
		got, err := ParseStamp(s.String())
		if err != nil || got != s {
			t.Fatalf("round trip %v: %v %v", s, got, err)
		}
	}
	byString := append([]Stamp(nil), ss...)
	sort.Slice(byString, func(i, j int) bool { return byString[i].String() < byString[j].String() })
	byStamp := append([]Stamp(nil), ss...)
	sort.Slice(byStamp, func(i, j int) bool { return byStamp[i].Before(byStamp[j]) })
	for i := range ss {
		if byString[i] != byStamp[i] {
			t.Fatalf("position %d: %v by string, %v by stamp", i, byString[i], byStamp[i])
		}
	}
	for _, bad := range []string{"", "0123", "0000000000000000000G", "0000000000000000000A", "00000000000000000000-", "00000000000000000000x", "-0000000000000000000"} {
		if _, err := ParseStamp(bad); !errors.Is(err, ErrBadStamp) {
			t.Errorf("%q: %v", bad, err)
		}
	}
}

// The send and receive rules of Kulkarni et al. (2014), Figure 5, worked
// by hand for each branch.
func TestClockRules(t *testing.T) {
	ft := &fakeTime{time.UnixMilli(10_000)}
	c := NewClock("srv", ft.now, time.Hour)
	if s := c.Now(); s.Wall != 10_000 || s.Logical != 0 {
		t.Fatalf("first: %v", s)
	}
	if s := c.Now(); s.Wall != 10_000 || s.Logical != 1 { // same ms: c+1
		t.Fatalf("second: %v", s)
	}
	ft.t = time.UnixMilli(9_000) // physical clock steps back: l stays, c+1
	if s := c.Now(); s.Wall != 10_000 || s.Logical != 2 {
		t.Fatalf("clock stepped back: %v", s)
	}
	c.Observe(Stamp{Wall: 12_000, Logical: 5}) // l' = lm: c = cm+1
	if s := c.Last(); s.Wall != 12_000 || s.Logical != 6 {
		t.Fatalf("after observe ahead: %v", s)
	}
	c.Observe(Stamp{Wall: 12_000, Logical: 9}) // l = lm: max(c, cm)+1
	if s := c.Last(); s.Wall != 12_000 || s.Logical != 10 {
		t.Fatalf("after observe equal: %v", s)
	}
	c.Observe(Stamp{Wall: 11_000, Logical: 50}) // l' = l: c+1
	if s := c.Last(); s.Wall != 12_000 || s.Logical != 11 {
		t.Fatalf("after observe behind: %v", s)
	}
	ft.t = time.UnixMilli(20_000) // physical ahead of both: c = 0
	c.Observe(Stamp{Wall: 11_000})
	if s := c.Last(); s.Wall != 20_000 || s.Logical != 0 {
		t.Fatalf("after physical jump: %v", s)
	}
}

// A phone years ahead: the clock follows only up to MaxAhead and reports
// it; afterwards local stamps stay near real time. A phone years behind
// changes nothing.
func TestClockClampsFutureStamps(t *testing.T) {
	now := time.Date(2026, 6, 1, 12, 0, 0, 0, time.UTC)
	ft := &fakeTime{now}
	c := NewClock("srv", ft.now, 24*time.Hour)
	future := Stamp{Wall: now.AddDate(3, 0, 0).UnixMilli(), Device: "phone"}
	ahead := c.Observe(future)
	if ahead < 3*365*24*time.Hour {
		t.Fatalf("ahead %v not reported", ahead)
	}
	s := c.Now()
	if lim := now.Add(24 * time.Hour).UnixMilli(); s.Wall > lim {
		t.Fatalf("clock followed the phone: %v > %v", s.Time(), time.UnixMilli(lim))
	}
	if !future.Before(Stamp{Wall: future.Wall + 1}) || s.Wall <= now.UnixMilli()-1 {
		t.Fatal("stamps must still increase")
	}
	past := Stamp{Wall: now.AddDate(-5, 0, 0).UnixMilli()}
	before := c.Last()
	if c.Observe(past) != 0 {
		t.Fatal("a stamp in the past is never clamped")
	}
	if after := c.Last(); after.Wall != before.Wall || after.Logical != before.Logical+1 {
		t.Fatalf("past stamp moved the clock: %v -> %v", before, after)
	}
}

// Stamps from one clock strictly increase whatever the physical clock does.
func TestClockMonotonic(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	ft := &fakeTime{time.UnixMilli(1_000_000)}
	c := NewClock("d", ft.now, 0)
	prev := c.Now()
	for i := 0; i < 10000; i++ {
		ft.t = ft.t.Add(time.Duration(rng.IntN(2000)-1000) * time.Millisecond)
		var s Stamp
		if rng.IntN(2) == 0 {
			c.Observe(Stamp{Wall: ft.t.UnixMilli() + rng.Int64N(5000) - 2500, Logical: rng.Uint32N(10)})
			s = c.Last()
		} else {
			s = c.Now()
		}
		if !prev.Before(s) {
			t.Fatalf("step %d: %v not after %v", i, s, prev)
		}
		prev = s
	}
}
