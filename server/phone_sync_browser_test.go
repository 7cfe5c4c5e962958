package server

import (
	"fmt"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	cdppage "github.com/chromedp/cdproto/page"
	"github.com/chromedp/chromedp"

	"tagtally/capture"
)

// acceptDialogs answers every confirm() the page shows with OK, as the
// crew member who tapped Delete does, and returns the messages shown.
func (p phone) acceptDialogs() func() []string {
	p.t.Helper()
	seen := make(chan string, 16)
	if err := chromedp.Listen(p.ctx, func(ev any) {
		if e, ok := ev.(*cdppage.EventJavascriptDialogOpening); ok {
			seen <- e.Message
			// Not from inside the listener: the answer is a command on
			// the same connection.
			go chromedp.Call(p.ctx, cdppage.HandleJavaScriptDialog, cdppage.HandleJavaScriptDialogParams{Accept: true})
		}
	}); err != nil {
		p.t.Fatal(err)
	}
	return func() []string {
		var out []string
		for {
			select {
			case m := <-seen:
				out = append(out, m)
			default:
				return out
			}
		}
	}
}

// openToday opens the Today screen and taps the record of tag, which
// opens it on the form for correcting.
func (p phone) openToday(tag string) {
	p.t.Helper()
	// The list shown before is emptied first, so the tap finds the list
	// the screen draws now, not one about to be replaced.
	evalAs[string](p.page, `document.getElementById("today-list").textContent = ""`)
	p.click(`.tabs button[data-go="today"]`)
	find := fmt.Sprintf(`Array.from(document.querySelectorAll("#today-list li .tag"), (s) => s.textContent).indexOf(%q)`, tag)
	p.wait(`!document.getElementById("screen-today").hidden && ` + find + ` >= 0`)
	p.click(fmt.Sprintf(`#today-list li:nth-child(%d) button`, evalAs[int](p.page, find)+1))
	p.wait(fmt.Sprintf(`!document.getElementById("editing-banner").hidden && document.getElementById("tag").value === %q`, tag))
}

// waitingStays checks that the outbox still holds n records for a while
// after the server came back: nothing but the event the test sends next
// may start the sync.
func (p phone) waitingStays(n int, d time.Duration) {
	p.t.Helper()
	for end := time.Now().Add(d); time.Now().Before(end); time.Sleep(100 * time.Millisecond) {
		if got := evalAs[string](p.page, `document.getElementById("outbox-count").textContent`); got != fmt.Sprint(n) {
			p.t.Fatalf("the outbox holds %s records before the app was nudged, want %d still waiting", got, n)
		}
	}
}

// awaitFailedAttempt waits until the app's own sync attempt after a save
// has found the server gone, so no attempt begun before the server
// returns is still running when the test nudges the app.
func (p phone) awaitFailedAttempt(save func()) {
	p.t.Helper()
	evalAs[string](p.page, `document.getElementById("server-state").textContent = ""`)
	save()
	p.wait(`document.getElementById("server-state").textContent.startsWith("not answering")`)
}

// serverHistory is the engine's history of one record.
func (ps *phoneServer) serverHistory(id string) (leaf capture.Capture, revs []capture.Capture, conflict bool) {
	ps.t.Helper()
	eng, err := ps.srv.engine()
	if err != nil {
		ps.t.Fatal(err)
	}
	h, err := eng.History(ps.study.ID, id)
	if err != nil {
		ps.t.Fatalf("history of %s: %v", id, err)
	}
	if len(h.Leaves) != 1 {
		ps.t.Fatalf("record %s has leaves %v, want one (history %+v)", id, h.Leaves, h)
	}
	for _, r := range h.Revisions {
		if r.Revision.ID == h.Leaves[0] {
			leaf = r
		}
	}
	return leaf, h.Revisions, h.Conflict
}

// TestPhoneSyncsByItselfEditsAndRefusalsInBrowser follows issue 6's
// behaviours of the phone app that the field-day test leaves out:
//   - the app sends its outbox by itself when it comes back to the screen
//     (visibilitychange) and when the phone's network returns (online),
//     without "Sync now";
//   - a record already on the server, corrected on the phone, reaches the
//     server as a child revision of the one it had (one leaf, no
//     conflict), and a record deleted on the phone as a deletion revision;
//   - a record the server refuses (a tag over 128 bytes, which the
//     phone's form lets through) stays in the outbox with the
//     server's reason on the Outbox screen, and once corrected on the
//     phone it is sent, under the same record ID.
func TestPhoneSyncsByItselfEditsAndRefusalsInBrowser(t *testing.T) {
	t0 := time.Now()
	mark := func(what string) { t.Logf("%5.1f s %s", time.Since(t0).Seconds(), what) }
	ps := newPhoneServer(t)
	p := openPhone(t, t.TempDir(), ps.url(), 360, 740, [2]float64{52.6103, 1.3500})
	dialogs := p.acceptDialogs()
	p.join(ps.joinCode(), "JW", false)
	p.waitServiceWorker()
	p.wait(`document.getElementById("last-sync").textContent !== "never"`)
	mark("joined")

	// Round 1: two records made out of reach of the camp, sent when the
	// crew comes back to the app.
	ps.stop()
	p.awaitFailedAttempt(func() { p.record(entry{tag: "BF-0401", status: "new", station: "B1", sex: "male", mass: "20.5"}, 1) })
	p.awaitFailedAttempt(func() { p.record(entry{tag: "BF-0402", status: "new", sex: "female", mass: "23"}, 2) })
	ps.start()
	p.waitingStays(2, time.Second)
	if v := evalAs[string](p.page, `document.visibilityState`); v != "visible" {
		t.Fatalf("the page is %q, want visible for the visibilitychange to count", v)
	}
	evalAs[bool](p.page, `document.dispatchEvent(new Event("visibilitychange"))`)
	p.wait(`document.getElementById("outbox-count").textContent === "0" && document.getElementById("tab-count").hidden`)
	mark("sent after visibilitychange")
	onPhone := p.stored("captures")
	if len(onPhone) != 2 {
		t.Fatalf("the phone holds %d records, want 2", len(onPhone))
	}
	idOf := map[string]string{}
	for _, c := range onPhone {
		idOf[c.TagID] = c.ID
	}
	first := map[string]string{} // tag -> the revision the server holds after round 1
	for _, tag := range []string{"BF-0401", "BF-0402"} {
		leaf, revs, conflict := ps.serverHistory(idOf[tag])
		if len(revs) != 1 || conflict || leaf.TagID != tag || leaf.Revision.Deleted {
			t.Fatalf("after round 1 the server holds %s as %d revisions (conflict %v, leaf %+v), want one live revision", tag, len(revs), conflict, leaf)
		}
		first[tag] = leaf.Revision.ID
	}

	// Round 2, out of reach again: the mass of BF-0401 is corrected and
	// the record of BF-0402 deleted on the phone; they are sent when the
	// phone's network comes back.
	ps.stop()
	p.openToday("BF-0401")
	if got := evalAs[string](p.page, `document.getElementById("mass").value`); got != "20.5" {
		t.Fatalf("the record opened for correcting shows mass %q, want 20.5", got)
	}
	p.awaitFailedAttempt(func() {
		p.erase("mass")
		p.do(chromedp.SendKeys(chromedp.ID("mass"), "21"))
		p.click("#save")
		p.wait(`document.getElementById("tab-count").textContent === "1" && document.getElementById("editing-banner").hidden`)
	})
	p.openToday("BF-0402")
	p.awaitFailedAttempt(func() {
		p.click("#delete-record")
		p.wait(`document.getElementById("tab-count").textContent === "2" && document.getElementById("editing-banner").hidden`)
	})
	if msgs := dialogs(); len(msgs) != 1 || !strings.Contains(msgs[0], "BF-0402") {
		t.Errorf("deleting asked %q, want one question naming BF-0402", msgs)
	}
	p.click(`.tabs button[data-go="today"]`)
	p.wait(`!document.getElementById("screen-today").hidden && document.querySelectorAll("#today-list li").length === 1`)
	ps.start()
	p.waitingStays(2, time.Second)
	evalAs[bool](p.page, `window.dispatchEvent(new Event("online"))`)
	p.wait(`document.getElementById("outbox-count").textContent === "0" && document.getElementById("tab-count").hidden`)
	mark("sent after online")
	if left := p.stored("outbox"); len(left) != 0 {
		t.Errorf("%d records left in the outbox", len(left))
	}
	edited, revs, conflict := ps.serverHistory(idOf["BF-0401"])
	if len(revs) != 2 || conflict || edited.MassG == nil || *edited.MassG != 21 || edited.Revision.Deleted ||
		!slices.Equal(edited.Revision.Parents, []string{first["BF-0401"]}) {
		t.Errorf("the corrected BF-0401 on the server: %d revisions, conflict %v, leaf mass %v parents %v deleted %v; want 2 revisions, the leaf 21 g a child of %s",
			len(revs), conflict, edited.MassG, edited.Revision.Parents, edited.Revision.Deleted, first["BF-0401"])
	}
	deleted, revs, conflict := ps.serverHistory(idOf["BF-0402"])
	if len(revs) != 2 || conflict || !deleted.Revision.Deleted || !slices.Equal(deleted.Revision.Parents, []string{first["BF-0402"]}) {
		t.Errorf("the deleted BF-0402 on the server: %d revisions, conflict %v, leaf deleted %v parents %v; want 2 revisions, the leaf a deletion child of %s",
			len(revs), conflict, deleted.Revision.Deleted, deleted.Revision.Parents, first["BF-0402"])
	}
	live, err := ps.store.Captures(ps.study.ID, false)
	if err != nil || len(live) != 1 || live[0].TagID != "BF-0401" {
		t.Errorf("the server's live records: %+v (%v), want only BF-0401", live, err)
	}

	// Round 3: a tag the server refuses. Sync stores pushed records
	// without the study's field rules (sync/doc.go), so a tag outside the
	// tag series is taken; what it refuses is a revision that would
	// corrupt the store, such as a tag over 128 bytes: here a tag reader
	// in keyboard mode has typed its read 19 times without a break. The
	// form refuses that tag at Save, so nothing waits in the outbox.
	long := strings.Repeat("BF-0123", 19)
	p.click(`.tabs button[data-go="record"]`)
	p.wait(`!document.getElementById("screen-record").hidden`)
	p.do(chromedp.SendKeys(chromedp.ID("tag"), long))
	p.wait(`document.getElementById("tag").value.length === ` + strconv.Itoa(len(long)))
	p.click("#save")
	p.wait(`document.getElementById("form-error").textContent.includes("too long")`)
	if n := len(p.stored("outbox")); n != 0 {
		t.Fatalf("the form saved a tag of %d characters: %d records in the outbox", len(long), n)
	}
	p.erase("tag")
	// A phone updated from an earlier build may still hold such a record
	// (the earlier form set no length): saved while the server is out of
	// reach, then rewritten in the phone's database as that build saved
	// it.
	ps.stop()
	p.awaitFailedAttempt(func() { p.record(entry{tag: "BF-0123", status: "new", sex: "female", mass: "19"}, 1) })
	await[bool](p, `new Promise((resolve, reject) => {
		const r = indexedDB.open("tagtally");
		r.onerror = () => reject(r.error);
		r.onsuccess = () => {
			const tx = r.result.transaction(["outbox", "captures"], "readwrite");
			for (const name of ["outbox", "captures"]) {
				const store = tx.objectStore(name);
				store.getAll().onsuccess = (ev) => {
					for (const x of ev.target.result) {
						if ((x.body || x).tag_id !== "BF-0123") continue;
						(x.body || x).tag_id = "`+long+`";
						store.put(x);
					}
				};
			}
			tx.oncomplete = () => { r.result.close(); resolve(true); };
			tx.onerror = () => reject(tx.error);
		};
	})`)
	ps.start()
	evalAs[bool](p.page, `window.dispatchEvent(new Event("online"))`)
	p.click(`.tabs button[data-go="outbox"]`)
	p.wait(`document.getElementById("rejected-list").textContent.includes("refused")`)
	mark("refused")
	reason := p.text("#rejected-list")
	if !strings.Contains(reason, long) || !strings.Contains(reason, "tag_id is longer than 128 bytes") {
		t.Errorf("the Outbox screen says %q, want the tag and the server's reason (longer than 128 bytes)", reason)
	}
	if got := p.text("#outbox-count"); got != "1" {
		t.Errorf("the outbox holds %s records after the refusal, want the refused 1", got)
	}
	refused := p.stored("outbox")
	if len(refused) != 1 || refused[0].TagID != long {
		t.Fatalf("the outbox holds %+v, want the refused record", refused)
	}
	if all, _ := ps.store.Captures(ps.study.ID, true); len(all) != 2 {
		t.Errorf("the server holds %d records after the refusal, want still 2", len(all))
	}
	// The crew taps the refusal, corrects the tag and saves: it is sent.
	p.click("#rejected-list .rejected")
	p.wait(`!document.getElementById("editing-banner").hidden && document.getElementById("tag").value === "` + long + `"`)
	p.erase("tag")
	p.do(chromedp.SendKeys(chromedp.ID("tag"), "BF-0123"))
	p.click("#save")
	p.wait(`document.getElementById("outbox-count").textContent === "0" && document.getElementById("tab-count").hidden`)
	mark("corrected and sent")
	fixed, revs, conflict := ps.serverHistory(refused[0].ID)
	if len(revs) != 1 || conflict || fixed.TagID != "BF-0123" || fixed.MassG == nil || *fixed.MassG != 19 {
		t.Errorf("the corrected record on the server: %d revisions, conflict %v, leaf %+v; want one revision of BF-0123, 19 g", len(revs), conflict, fixed)
	}
	// The Outbox screen redraws its list of refusals when opened.
	p.click(`.tabs button[data-go="outbox"]`)
	p.wait(`!document.getElementById("screen-outbox").hidden && document.getElementById("rejected-list").textContent === ""`)
}
