// Package appfiles serves the embedded phone app with the caching rules an
// offline app needs: the page and the service worker are always
// revalidated (Cache-Control: no-cache) so a new build reaches phones on
// their next visit, every file carries a checksum ETag so revalidation
// costs one round trip, and the service worker is served with the build's
// version written into it, which gives each build its own offline cache.
package appfiles

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"io/fs"
	"mime"
	"net/http"
	"path"
	"strings"
	"time"
)

// Handler serves an app file system.
type Handler struct {
	files   map[string]file
	version string
}

type file struct {
	body        []byte
	etag        string
	contentType string
	noCache     bool
}

// versionPlaceholder is replaced in the service worker by the version.
const versionPlaceholder = "BUILD_VERSION"

// New reads every file of fsys once. version names this build of the app.
func New(fsys fs.FS, version string) (*Handler, error) {
	h := &Handler{files: map[string]file{}, version: version}
	err := fs.WalkDir(fsys, ".", func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		body, err := fs.ReadFile(fsys, p)
		if err != nil {
			return err
		}
		f := file{body: body, contentType: contentType(p)}
		switch p {
		case "sw.js":
			f.body = bytes.ReplaceAll(body, []byte(versionPlaceholder), []byte(version))
			f.noCache = true
		case "index.html", "manifest.webmanifest", "coord/index.html":
			f.noCache = true
		}
		sum := sha256.Sum256(f.body)
		f.etag = `"` + hex.EncodeToString(sum[:12]) + `"`
		h.files["/"+p] = f
		return nil
	})
	return h, err
}

func contentType(p string) string {
	switch path.Ext(p) {
	case ".js":
		return "text/javascript; charset=utf-8"
	case ".webmanifest":
		return "application/manifest+json"
	case ".svg":
		return "image/svg+xml"
	}
	if t := mime.TypeByExtension(path.Ext(p)); t != "" {
		return t
	}
	return "application/octet-stream"
}

// Has reports whether the app has a file at the URL path.
func (h *Handler) Has(urlPath string) bool {
	_, ok := h.lookup(urlPath)
	return ok
}

func (h *Handler) lookup(urlPath string) (file, bool) {
	p := path.Clean("/" + urlPath)
	if p == "/" {
		p = "/index.html"
	}
	f, ok := h.files[p]
	if !ok && strings.HasSuffix(urlPath, "/") { // a folder's page, e.g. /coord/
		f, ok = h.files[p+"/index.html"]
	}
	return f, ok
}

// ServeHTTP serves a file, or 404. Only GET and HEAD are allowed.
func (h *Handler) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	if r.Method != http.MethodGet && r.Method != http.MethodHead {
		w.Header().Set("Allow", "GET, HEAD")
		http.Error(w, `{"error":"only GET is served for app files"}`, http.StatusMethodNotAllowed)
		return
	}
	if strings.Contains(r.URL.Path, "..") {
		http.NotFound(w, r)
		return
	}
	f, ok := h.lookup(r.URL.Path)
	if !ok {
		http.NotFound(w, r)
		return
	}
	hd := w.Header()
	hd.Set("Content-Type", f.contentType)
	hd.Set("ETag", f.etag)
	hd.Set("X-Content-Type-Options", "nosniff")
	if f.noCache {
		hd.Set("Cache-Control", "no-cache")
	} else {
		// Revalidate after a day; the service worker's versioned cache is
		// what keeps files on the phone, so this only spares round trips.
		hd.Set("Cache-Control", "public, max-age=86400")
	}
	if r.URL.Path == "/sw.js" {
		hd.Set("Service-Worker-Allowed", "/")
	}
	http.ServeContent(w, r, "", time.Time{}, bytes.NewReader(f.body))
}
