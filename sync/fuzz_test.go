package sync

import (
	"encoding/json"
	"strings"
	"testing"
)

// FuzzDecodePush feeds arbitrary bodies to the push decoder and then to
// the merge. Nothing may panic; the decoder decides every body as the
// reference decoder does (push_test.go); every revision gets exactly one
// result; the seed corpus runs in every `go test`. For a short fuzz run in CI:
//
//	go test ./sync -run '^$' -fuzz FuzzDecodePush -fuzztime 10s
func FuzzDecodePush(f *testing.F) {
	good := phoneRev(f, body("01890a5d-ac96-774b-bcce-b302099a8057", 1), nil, false, st(1000, "p"))
	gj, _ := json.Marshal(good)
	child := phoneRev(f, body("01890a5d-ac96-774b-bcce-b302099a8057", 2), []string{good.Revision.ID}, true, st(2000, "p"))
	cj, _ := json.Marshal(child)
	for _, s := range []string{
		`{"source":"p","revisions":[` + string(gj) + `]}`,
		`{"source":"p","revisions":[` + string(cj) + `,` + string(gj) + `]}`,
		`{"revisions":[{}, null, 1, "x", [], {"id":"01890a5d-ac96-774b-bcce-b302099a8057"}]}`,
		`{"revisions":[{"revision":{"parents":["zz"],"stamp":"00000000000000000000"}}]}`,
		`{"source":"\u0000"}`, `{}`, `null`, `[]`, ``, `{"revisions":{}}`,
		strings.Replace(string(gj), `"mass_g"`, `"mass_g":1e999,"x"`, 1),
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		sameDecode(t, data)
		b, err := DecodePush(strings.NewReader(string(data)))
		if err != nil {
			return
		}
		if len(b.Revisions) != len(b.Errors) || len(b.Revisions) > MaxPushRevisions {
			t.Fatalf("batch shape %d/%d", len(b.Revisions), len(b.Errors))
		}
		e, _ := newMemEngine("server", testStudy)
		rep, err := e.Push(b)
		if err != nil {
			t.Fatal(err)
		}
		if len(rep.Results) != len(b.Revisions) {
			t.Fatalf("%d results for %d revisions", len(rep.Results), len(b.Revisions))
		}
		for _, r := range rep.Results {
			if r.Status == StatusRejected && r.Reason == "" {
				t.Fatal("rejection without a reason")
			}
		}
	})
}

func FuzzParseStampAndCursor(f *testing.F) {
	for _, s := range []string{"00000000000000000000", "018c1a2b3c4d00000002-phone-7", "abc-12", "-", "x-18446744073709551616"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		if st, err := ParseStamp(s); err == nil && st.String() != s {
			t.Fatalf("%q parses but prints as %q", s, st.String())
		}
		if ep, seq, err := ParseCursor(s); err == nil {
			if _, _, err := ParseCursor(FormatCursor(ep, seq)); err != nil {
				t.Fatal(err)
			}
		}
	})
}
