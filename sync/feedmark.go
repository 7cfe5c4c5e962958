package sync

import (
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	stdsync "sync"
)

// The feed mark is a one-line side file next to the data file:
//
//	tagtally feed mark 1 EPOCH SEQ(20 digits)\n
//
// always the same length, rewritten in place (see Open for its purpose).
// A torn or missing file reads as an error, which makes a new epoch: the
// safe answer.
type feedMarkData struct {
	epoch string
	seq   uint64
}

const feedMarkPrefix = "tagtally feed mark 1 "

func formatFeedMark(epoch string, seq uint64) []byte {
	return []byte(fmt.Sprintf("%s%s %020d\n", feedMarkPrefix, epoch, seq))
}

func readFeedMark(path string) (feedMarkData, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return feedMarkData{}, err
	}
	s, ok := strings.CutPrefix(string(b), feedMarkPrefix)
	if !ok || !strings.HasSuffix(s, "\n") {
		return feedMarkData{}, fmt.Errorf("%s: not a feed mark", path)
	}
	ep, n, ok := strings.Cut(strings.TrimSuffix(s, "\n"), " ")
	if !ok || len(n) != 20 {
		return feedMarkData{}, fmt.Errorf("%s: not a feed mark", path)
	}
	seq, err := strconv.ParseUint(n, 10, 64)
	if err != nil {
		return feedMarkData{}, fmt.Errorf("%s: not a feed mark", path)
	}
	return feedMarkData{epoch: ep, seq: seq}, nil
}

type feedMark struct {
	mu    stdsync.Mutex
	f     *os.File
	epoch string
	seq   uint64
	err   error // first write error, reported at close
}

// openFeedMark writes the mark durably (temporary file, fsync, rename) and
// keeps it open for in-place updates.
func openFeedMark(path, epoch string, seq uint64) (*feedMark, error) {
	tmp := path + ".tmp"
	f, err := os.OpenFile(tmp, os.O_RDWR|os.O_CREATE|os.O_TRUNC, 0o600)
	if err != nil {
		return nil, fmt.Errorf("feed mark: %w", err)
	}
	if _, err := f.Write(formatFeedMark(epoch, seq)); err != nil {
		f.Close()
		return nil, fmt.Errorf("feed mark: %w", err)
	}
	if err := f.Sync(); err != nil {
		f.Close()
		return nil, fmt.Errorf("feed mark: %w", err)
	}
	if err := os.Rename(tmp, path); err != nil {
		f.Close()
		return nil, fmt.Errorf("feed mark: %w", err)
	}
	if d, err := os.Open(filepath.Dir(path)); err == nil {
		_ = d.Sync() // best effort: not every system syncs directories
		d.Close()
	}
	return &feedMark{f: f, epoch: epoch, seq: seq}, nil
}

// advance records that the feed reached seq (after its commit). The write
// goes to the page cache: it survives the process being killed, and a
// power loss can only leave an older value, which never causes a false
// "restored" verdict.
func (m *feedMark) advance(seq uint64) {
	m.mu.Lock()
	defer m.mu.Unlock()
	if seq <= m.seq || m.f == nil {
		return
	}
	m.seq = seq
	if _, err := m.f.WriteAt(formatFeedMark(m.epoch, seq), 0); err != nil && m.err == nil {
		m.err = err
	}
}

func (m *feedMark) close() error {
	m.mu.Lock()
	defer m.mu.Unlock()
	if m.f == nil {
		return m.err
	}
	err := m.f.Sync()
	if cerr := m.f.Close(); err == nil {
		err = cerr
	}
	m.f = nil
	if m.err != nil {
		return fmt.Errorf("feed mark: %w", m.err)
	}
	if err != nil {
		return fmt.Errorf("feed mark: %w", err)
	}
	return nil
}
