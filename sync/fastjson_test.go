package sync

import (
	"encoding/json"
	"reflect"
	"strings"
	"testing"
	"time"

	"tagtally/capture"
)

// fill sets every field of v (recursively) to a non-empty value, so that
// its JSON names every member.
func fill(v reflect.Value) {
	switch v.Kind() {
	case reflect.String:
		v.SetString("x é")
	case reflect.Int, reflect.Int64:
		v.SetInt(3)
	case reflect.Bool:
		v.SetBool(true)
	case reflect.Float64:
		v.SetFloat(1.25)
	case reflect.Pointer:
		v.Set(reflect.New(v.Type().Elem()))
		fill(v.Elem())
	case reflect.Slice:
		v.Set(reflect.MakeSlice(v.Type(), 2, 2))
		fill(v.Index(0))
		fill(v.Index(1))
	case reflect.Struct:
		if v.Type() == timeType {
			v.Set(reflect.ValueOf(time.Date(2025, 6, 2, 21, 30, 0, 5e8, time.FixedZone("", 3600))))
			return
		}
		for i := 0; i < v.NumField(); i++ {
			if v.Type().Field(i).IsExported() {
				fill(v.Field(i))
			}
		}
	}
}

// The fast decoder knows every member of capture.Capture (and of its
// revision and measurements) under its JSON name with its type: a capture
// with every field set decodes on the fast path, to exactly what
// encoding/json makes of it. A field added to capture.Capture, or a tag
// renamed, fails here until the fast decoder knows it.
func TestDecodeCaptureFastKnowsEveryField(t *testing.T) {
	var full capture.Capture
	fill(reflect.ValueOf(&full).Elem())
	js, err := json.Marshal(full)
	if err != nil {
		t.Fatal(err)
	}
	var fast, ref capture.Capture
	if !decodeCaptureFast(js, &fast) {
		t.Fatalf("a capture with every field set left the fast path: %s", js)
	}
	if err := json.Unmarshal(js, &ref); err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(fast, ref) {
		t.Fatalf("fast %+v\nencoding/json %+v", fast, ref)
	}
	// A phone's ordinary revision takes the fast path too.
	c := phoneRev(t, body("01890a5d-ac96-774b-bcce-b302099a8057", 1), nil, false, st(1000, "p"))
	js, _ = json.Marshal(c)
	if !decodeCaptureFast(js, new(capture.Capture)) {
		t.Fatalf("an ordinary revision left the fast path: %s", js)
	}
}

// FuzzDecodeCaptureFast: whatever the fast decoder accepts, encoding/json
// accepts too and decodes to the same capture. For a short fuzz run:
//
//	go test ./sync -run '^$' -fuzz FuzzDecodeCaptureFast -fuzztime 10s
func FuzzDecodeCaptureFast(f *testing.F) {
	var full capture.Capture
	fill(reflect.ValueOf(&full).Elem())
	fj, _ := json.Marshal(full)
	c := phoneRev(f, body("01890a5d-ac96-774b-bcce-b302099a8057", 1), nil, false, st(1000, "p"))
	cj, _ := json.Marshal(c)
	for _, s := range []string{
		string(fj), string(cj), `{}`, ` { } `, `{"id":"a","id":"b"}`, `{"ID":"a"}`, `{"notes":"a\nb"}`, `{"notes":"\u00e9"}`,
		`{"occasion":1.0}`, `{"occasion":1e2}`, `{"occasion":-0}`, `{"occasion":01}`, `{"occasion":99999999999999999999}`,
		`{"mass_g":1e999}`, `{"mass_g":-0.0}`, `{"mass_g":null}`, `{"lat":-41.290000000000003}`, `{"measurements":[]}`,
		`{"measurements":[{}]}`, `{"measurements":[{"value":2,"value":3}]}`, `{"revision":{"parents":[]}}`,
		`{"revision":{"parents":["a","b"],"depth":2,"deleted":true}}`, `{"captured_at":"2025-06-02T20:00:00Z"}`,
		`{"captured_at":"2025-06-02T20:00:00+25:00"}`, `{"captured_at":"2025-6-2"}`, `{"captured_at":""}`,
		`{"occasion_set_by_hand":true}`, `{"occasion_set_by_hand":tru}`, `{"occasion_set_by_hand":truex}`,
		"{\"notes\":\"\xff\"}", `{"tag_id":"a"} x`, `{"tag_id":"a",}`, `{"revision":{"stamp":"s"},"revision":{"id":"i"}}`,
		strings.Replace(string(cj), `"notes"`, ` "notes" `, 1),
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		var fast capture.Capture
		if !decodeCaptureFast(data, &fast) {
			return
		}
		var ref capture.Capture
		if err := json.Unmarshal(data, &ref); err != nil {
			t.Fatalf("fast path accepted %q, encoding/json: %v", data, err)
		}
		if !reflect.DeepEqual(fast, ref) {
			t.Fatalf("%q: fast %+v\nencoding/json %+v", data, fast, ref)
		}
	})
}
