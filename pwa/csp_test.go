package pwa

import (
	"io/fs"
	"regexp"
	"strings"
	"testing"
)

var (
	scriptTag = regexp.MustCompile(`(?is)<script\b([^>]*)>(.*?)</script>`)
	inlineBad = []struct {
		what string
		re   *regexp.Regexp
	}{
		{"event handler attribute", regexp.MustCompile(`(?i)<[^>]+\son[a-z]+\s*=`)},
		{"style attribute", regexp.MustCompile(`(?i)<[^>]+\sstyle\s*=`)},
		{"style element", regexp.MustCompile(`(?i)<style\b`)},
		{"javascript: URL", regexp.MustCompile(`(?i)javascript:`)},
	}
)

// inlineProblems lists what in a page the server's Content-Security-Policy
// would block: scripts that are not files of the app, handlers and styles
// written in the page, javascript: links.
func inlineProblems(page string) []string {
	var out []string
	for _, m := range scriptTag.FindAllStringSubmatch(page, -1) {
		if !regexp.MustCompile(`(?i)\ssrc\s*=`).MatchString(m[1]) || strings.TrimSpace(m[2]) != "" {
			out = append(out, "inline script")
		}
	}
	for _, x := range inlineBad {
		if x.re.MatchString(page) {
			out = append(out, x.what)
		}
	}
	return out
}

// The server's CSP runs only the app's own script files and style
// sheets, so a page with inline script, handlers or styles would break.
// The browser tests catch what the scripts do at run time
// (server/access_browser_test.go, watchCSP); this checks the pages.
func TestPagesHaveNoInlineScriptOrStyle(t *testing.T) {
	for _, sample := range []string{`<script>alert(1)</script>`, `<script type="module"></script>`, `<button onclick="go()">`, `<p style="color:red">`, `<style>p{}</style>`, `<a href="javascript:void(0)">`} {
		if len(inlineProblems(sample)) == 0 {
			t.Errorf("the check misses %s", sample)
		}
	}
	if p := inlineProblems(`<script type="module" src="/js/main.js"></script><link rel="stylesheet" href="/app.css">`); len(p) != 0 {
		t.Errorf("the check refuses a script file: %v", p)
	}
	n := 0
	err := fs.WalkDir(Files(), ".", func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() || !strings.HasSuffix(p, ".html") {
			return err
		}
		n++
		b, err := fs.ReadFile(Files(), p)
		if err != nil {
			return err
		}
		for _, problem := range inlineProblems(string(b)) {
			t.Errorf("%s has an %s", p, problem)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if n < 2 {
		t.Fatalf("checked %d pages; expected the phone app's and the coordinator's", n)
	}
}
