package server

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/chromedp/chromedp"

	"tagtally/demo"
)

// TestTransferPageInBrowser checks the coordinator's export and import
// page: the workbook link points at the export endpoint, and a file with a
// bad row, checked through the page, lists the row and writes nothing.
func TestTransferPageInBrowser(t *testing.T) {
	ds := newDemoServer(t)
	p := page{t: t, ctx: browser(t), dir: screenshotDir(t)}
	watchCSP(p)
	p.signIn(ds.srv, ds.URL)
	p.show(ds.URL, "transfer")
	href := evalAs[string](p, `document.querySelector("#export-xlsx").getAttribute("href")`)
	if href != "/api/v1/studies/"+demo.StudyID+"/export.xlsx" {
		t.Errorf("workbook link %q", href)
	}
	bad := filepath.Join(t.TempDir(), "old-ledger.csv")
	if err := os.WriteFile(bad, []byte("tag,date,station\nQH-0801,2026-06-14 06:30,A1\nQH-0802,14 June,A1\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	before, _ := ds.store.Captures(demo.StudyID, true)
	p.do(chromedp.SetUploadFiles(chromedp.CSS("#import-file"), []string{bad}),
		chromedp.Click(chromedp.CSS("main button.primary")),
		chromedp.WaitVisible(chromedp.CSS("#import-problems")))
	text := p.text("#import-report")
	if !strings.Contains(text, "nothing was imported") || !strings.Contains(text, "14 June") {
		t.Errorf("import report: %s", text)
	}
	p.shot("coord-transfer.png", false)
	after, _ := ds.store.Captures(demo.StudyID, true)
	if len(after) != len(before) {
		t.Errorf("a file with a bad row wrote %d records", len(after)-len(before))
	}
}
