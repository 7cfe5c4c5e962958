package pwa

import (
	"encoding/json"
	"io/fs"
	"regexp"
	"slices"
	"strings"
	"testing"
)

// Every file the app needs offline must be in the service worker's shell
// list, or the app breaks the first time it opens with no network.
func TestServiceWorkerCachesEveryShellFile(t *testing.T) {
	sw, err := fs.ReadFile(Files(), "sw.js")
	if err != nil {
		t.Fatal(err)
	}
	listed := map[string]bool{}
	for _, m := range regexp.MustCompile(`"(/[^"]*)"`).FindAllStringSubmatch(string(sw), -1) {
		listed[m[1]] = true
	}
	_ = fs.WalkDir(Files(), ".", func(p string, d fs.DirEntry, err error) error {
		// coord/ holds the coordinator's pages, used on a laptop at camp
		// while the server answers; they are not part of the phone's
		// offline shell, so sw.js does not cache them.
		if err == nil && d.IsDir() && p == "coord" {
			return fs.SkipDir
		}
		if err != nil || d.IsDir() || p == "sw.js" || p == "index.html" {
			return err
		}
		if !listed["/"+p] {
			t.Errorf("sw.js does not cache /%s", p)
		}
		return nil
	})
	if !listed["/"] {
		t.Error("sw.js does not cache the page itself")
	}
}

// The manifest must carry what browsers require to offer installation:
// a name, start_url, display standalone or fullscreen, and 192 px and
// 512 px PNG icons (common practice, per the Web App Manifest
// specification and browsers' install criteria).
func TestManifestIsInstallable(t *testing.T) {
	b, err := fs.ReadFile(Files(), "manifest.webmanifest")
	if err != nil {
		t.Fatal(err)
	}
	var m struct {
		Name, ShortName, StartURL, Display string
		Icons                              []struct{ Src, Sizes, Type string }
	}
	dec := json.NewDecoder(strings.NewReader(string(b)))
	if err := dec.Decode(&struct {
		Name      *string `json:"name"`
		ShortName *string `json:"short_name"`
		StartURL  *string `json:"start_url"`
		Display   *string `json:"display"`
		Icons     *[]struct{ Src, Sizes, Type string } `json:"icons"`
	}{&m.Name, &m.ShortName, &m.StartURL, &m.Display, &m.Icons}); err != nil {
		t.Fatalf("manifest is not valid JSON: %v", err)
	}
	if m.Name == "" || m.ShortName == "" || m.StartURL == "" {
		t.Errorf("manifest lacks name, short_name or start_url: %+v", m)
	}
	if !slices.Contains([]string{"standalone", "fullscreen", "minimal-ui"}, m.Display) {
		t.Errorf("display %q does not allow installation", m.Display)
	}
	sizes := map[string]bool{}
	for _, ic := range m.Icons {
		if ic.Type == "image/png" {
			if _, err := fs.Stat(Files(), strings.TrimPrefix(ic.Src, "/")); err != nil {
				t.Errorf("icon %s is missing", ic.Src)
			}
			sizes[ic.Sizes] = true
		}
	}
	if !sizes["192x192"] || !sizes["512x512"] {
		t.Errorf("manifest needs 192x192 and 512x512 PNG icons, has %v", sizes)
	}
}

func TestVersionIsStable(t *testing.T) {
	if Version() != Version() || len(Version()) != 16 {
		t.Errorf("version %q", Version())
	}
}
