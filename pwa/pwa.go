// Package pwa holds the phone app: plain HTML, CSS and JavaScript modules
// embedded in the binary, with no build step. The server serves them; the
// service worker (static/sw.js) keeps them on the phone for offline use
// and answers the app's page from that cache first, so the app opens at
// once whether or not the camp server answers. Each build gets its own
// cache (see Version); the open app looks for a new build whenever it
// reaches the server.
//
// Records are written to the phone's IndexedDB first (an outbox) and sent
// to the camp server when it answers; see static/js/outbox.js for the
// rules that make sure nothing saved is lost.
package pwa

import (
	"crypto/sha256"
	"embed"
	"encoding/hex"
	"errors"
	"io/fs"
	"regexp"
	"sort"
)

//go:embed static
var embedded embed.FS

// Files returns the app's files rooted at the app's top folder, so
// "index.html" and "js/main.js" are valid names.
func Files() fs.FS {
	sub, err := fs.Sub(embedded, "static")
	if err != nil {
		panic(err) // the embed pattern guarantees the folder exists
	}
	return sub
}

// Version is a short hash of every embedded file's name and content. The
// server writes it into the service worker so each build gets its own
// offline cache.
func Version() string {
	h := sha256.New()
	files := Files()
	var names []string
	_ = fs.WalkDir(files, ".", func(path string, d fs.DirEntry, err error) error {
		if err == nil && !d.IsDir() {
			names = append(names, path)
		}
		return nil
	})
	sort.Strings(names)
	for _, n := range names {
		b, _ := fs.ReadFile(files, n)
		h.Write([]byte(n))
		h.Write([]byte{0})
		h.Write(b)
	}
	return hex.EncodeToString(h.Sum(nil))[:16]
}

var (
	shellList = regexp.MustCompile(`(?s)const SHELL = \[(.*?)\];`)
	shellPath = regexp.MustCompile(`"(/[^"]*)"`)
)

// ShellFiles lists, sorted, the URL paths the service worker keeps for
// offline use (its SHELL list in sw.js): the app shell whose size and
// caching the tests check.
func ShellFiles() ([]string, error) {
	sw, err := fs.ReadFile(Files(), "sw.js")
	if err != nil {
		return nil, err
	}
	list := shellList.FindSubmatch(sw)
	if list == nil {
		return nil, errors.New("sw.js has no SHELL list")
	}
	var out []string
	for _, m := range shellPath.FindAllSubmatch(list[1], -1) {
		out = append(out, string(m[1]))
	}
	sort.Strings(out)
	return out, nil
}
