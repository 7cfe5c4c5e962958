package appfiles

import (
	"net/http"
	"net/http/httptest"
	"strings"
	"testing"
	"testing/fstest"

	"tagtally/pwa"
)

func TestCachingRules(t *testing.T) {
	fsys := fstest.MapFS{
		"index.html":  {Data: []byte("<!doctype html>")},
		"sw.js":       {Data: []byte(`const VERSION = "BUILD_VERSION";`)},
		"js/main.js":  {Data: []byte("export {}")},
		"icons/i.svg": {Data: []byte("<svg/>")},
	}
	h, err := New(fsys, "abc123")
	if err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		path, cache, ctype, body string
		code                     int
	}{
		{"/", "no-cache", "text/html; charset=utf-8", "<!doctype html>", 200},
		{"/sw.js", "no-cache", "text/javascript; charset=utf-8", `const VERSION = "abc123";`, 200},
		{"/js/main.js", "public, max-age=86400", "text/javascript; charset=utf-8", "export {}", 200},
		{"/icons/i.svg", "public, max-age=86400", "image/svg+xml", "<svg/>", 200},
		{"/missing.js", "", "", "", 404},
		{"/js/../../etc/passwd", "", "", "", 404},
	}
	for _, c := range cases {
		rec := httptest.NewRecorder()
		h.ServeHTTP(rec, httptest.NewRequest("GET", c.path, nil))
		if rec.Code != c.code {
			t.Errorf("%s: status %d, want %d", c.path, rec.Code, c.code)
			continue
		}
		if c.code != 200 {
			continue
		}
		if got := rec.Header().Get("Cache-Control"); got != c.cache {
			t.Errorf("%s: Cache-Control %q, want %q", c.path, got, c.cache)
		}
		if got := rec.Header().Get("Content-Type"); got != c.ctype {
			t.Errorf("%s: Content-Type %q, want %q", c.path, got, c.ctype)
		}
		if rec.Body.String() != c.body {
			t.Errorf("%s: body %q, want %q", c.path, rec.Body.String(), c.body)
		}
		etag := rec.Header().Get("ETag")
		again := httptest.NewRecorder()
		req := httptest.NewRequest("GET", c.path, nil)
		req.Header.Set("If-None-Match", etag)
		h.ServeHTTP(again, req)
		if again.Code != http.StatusNotModified {
			t.Errorf("%s: revalidation with ETag gave %d, want 304", c.path, again.Code)
		}
	}
	rec := httptest.NewRecorder()
	h.ServeHTTP(rec, httptest.NewRequest("POST", "/", nil))
	if rec.Code != http.StatusMethodNotAllowed {
		t.Errorf("POST: %d", rec.Code)
	}
}

// The real app must stay small enough for phones on weak links: the
// phone-app issue sets 300 KB uncompressed for the whole shell.
func TestRealAppShellSize(t *testing.T) {
	h, err := New(pwa.Files(), pwa.Version())
	if err != nil {
		t.Fatal(err)
	}
	total := 0
	for name, f := range h.files {
		total += len(f.body)
		if strings.HasSuffix(name, ".js") && strings.Contains(string(f.body), "http://") {
			t.Errorf("%s refers to an outside address; the app must work offline", name)
		}
	}
	if total > 300*1024 {
		t.Errorf("app shell is %d bytes, over 300 KB", total)
	}
	t.Logf("app shell: %d files, %d bytes", len(h.files), total)
	if !h.Has("/sw.js") || !h.Has("/manifest.webmanifest") || !h.Has("/") {
		t.Error("the app lacks its page, manifest or service worker")
	}
}
