package server

import (
	"bytes"
	"io"
	"mime/multipart"
	"net/http"
	"strings"
	"testing"

	"github.com/xuri/excelize/v2"

	"tagtally/demo"
)

func TestExportWorkbookAndTables(t *testing.T) {
	ds := newDemoServer(t)
	st, _ := demo.Build()
	resp, err := ds.Client().Get(ds.URL + "/api/v1/studies/" + st.ID + "/export.xlsx")
	if err != nil {
		t.Fatal(err)
	}
	body, _ := io.ReadAll(resp.Body)
	resp.Body.Close()
	if resp.StatusCode != 200 || !strings.Contains(resp.Header.Get("Content-Disposition"), ".xlsx") {
		t.Fatalf("workbook: %d %s", resp.StatusCode, resp.Header)
	}
	f, err := excelize.OpenReader(bytes.NewReader(body))
	if err != nil {
		t.Fatalf("the download is not a workbook: %v", err)
	}
	if got := f.GetSheetList(); len(got) < 5 || got[0] != "Summary" || got[1] != "Captures" {
		t.Errorf("sheets %v", got)
	}
	f.Close()
	for table, header := range map[string]string{"histories.csv": "id,history", "captures.csv": "id,study_id,occasion", "checks.csv": "check,severity"} {
		resp, err := ds.Client().Get(ds.URL + "/api/v1/studies/" + st.ID + "/export/" + table)
		if err != nil {
			t.Fatal(err)
		}
		b, _ := io.ReadAll(resp.Body)
		resp.Body.Close()
		if resp.StatusCode != 200 || !strings.HasPrefix(string(b), header) {
			t.Errorf("%s: %d %.80s", table, resp.StatusCode, b)
		}
	}
	resp, _ = ds.Client().Get(ds.URL + "/api/v1/studies/" + st.ID + "/export/nonsense.csv")
	resp.Body.Close()
	if resp.StatusCode != http.StatusNotFound {
		t.Errorf("unknown table: %d", resp.StatusCode)
	}
}

func TestImportThroughAPI(t *testing.T) {
	ds := newDemoServer(t)
	st, _ := demo.Build()
	before, _ := ds.store.Captures(st.ID, true)
	post := func(query string, file string) (int, string) {
		var buf bytes.Buffer
		w := multipart.NewWriter(&buf)
		fw, _ := w.CreateFormFile("file", "old-ledger.csv")
		fw.Write([]byte(file))
		w.Close()
		resp, err := ds.Client().Post(ds.URL+"/api/v1/studies/"+st.ID+"/import"+query, w.FormDataContentType(), &buf)
		if err != nil {
			t.Fatal(err)
		}
		defer resp.Body.Close()
		b, _ := io.ReadAll(resp.Body)
		return resp.StatusCode, string(b)
	}
	bad := "tag,date,station\nQH-0801,2026-05-14 06:30,A1\nQH-0802,not a date,A1\n"
	if code, body := post("", bad); code != http.StatusUnprocessableEntity || !strings.Contains(body, `"row":3`) {
		t.Errorf("bad file: %d %s", code, body)
	}
	good := "tag,date,station\nQH-0801,2026-05-14 06:30,A1\nQH-0802,2026-05-14 06:40,A2\n"
	if code, body := post("?dry_run=true", good); code != 200 || !strings.Contains(body, `"written":0`) {
		t.Errorf("dry run: %d %s", code, body)
	}
	mid, _ := ds.store.Captures(st.ID, true)
	if len(mid) != len(before) {
		t.Fatalf("a bad file or a dry run wrote records: %d -> %d", len(before), len(mid))
	}
	for i := 0; i < 2; i++ { // the second import of the same file adds nothing
		if code, body := post("", good); code != 200 {
			t.Fatalf("import %d: %d %s", i, code, body)
		}
	}
	after, _ := ds.store.Captures(st.ID, true)
	if len(after) != len(before)+2 {
		t.Errorf("records %d -> %d, want +2", len(before), len(after))
	}
	for _, c := range after {
		if c.TagID != "QH-0801" && c.TagID != "QH-0802" {
			continue
		}
		if c.Revision.ID == "" || c.Revision.Stamp == "" {
			t.Errorf("imported record %s has no revision: it would not sync", c.ID)
		}
	}
}
