package main

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"time"

	bolt "go.etcd.io/bbolt"

	"tagtally/capture"
)

// errInUse means another process (usually a running `tagtally serve`)
// holds the data file's lock.
var errInUse = errors.New("the data file is in use by another program")

// openStore opens the data file, creating its folder if needed. If another
// process holds the file, it gives up after a second with errInUse rather
// than waiting for ever.
func openStore(path string) (*capture.Store, error) {
	if err := os.MkdirAll(filepath.Dir(path), 0o700); err != nil {
		return nil, fmt.Errorf("data folder: %w", err)
	}
	s, err := capture.Open(path, &capture.Options{Timeout: time.Second, FileMode: 0o600})
	if errors.Is(err, bolt.ErrTimeout) {
		return nil, fmt.Errorf("%w: %s (is `tagtally serve` running with it?)", errInUse, path)
	}
	return s, err
}
