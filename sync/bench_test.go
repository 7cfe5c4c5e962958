package sync

import (
	"bytes"
	"encoding/json"
	"fmt"
	"path/filepath"
	"testing"
	"time"

	"github.com/google/uuid"
	bolt "go.etcd.io/bbolt"

	"tagtally/capture"
	"tagtally/capture/storetest"
)

const (
	benchRecords = 100_000
	benchBatch   = 500
)

// benchData is 100,000 first revisions of realistic captures (UUID v7
// IDs, about 450 bytes of JSON each), as push bodies of 500.
type benchData struct {
	ids    [][16]byte
	js     [][]byte
	bodies [][]byte
}

var benchCache *benchData

func makeBenchData(b *testing.B) *benchData {
	if benchCache != nil {
		return benchCache
	}
	d := &benchData{}
	clock := NewClock("phone-3", nil, 0)
	mass := 21.5
	lat, lon := -41.29, 174.78
	for i := 0; i < benchRecords; i++ {
		u := uuid.Must(uuid.NewV7())
		c := &capture.Capture{
			ID: u.String(), StudyID: testStudy, TagID: fmt.Sprintf("BF-%04d", i%10000), Event: capture.EventRecapture,
			StationID: "A1", Species: "bank vole", Sex: capture.SexFemale, Age: capture.AgeAdult, MassG: &mass,
			Measurements: []capture.Measurement{{Name: "hind foot", Value: 17.5, Unit: "mm"}},
			Fate:         capture.FateReleased, Observer: "crew 2", Device: "phone-3",
			CapturedAt: time.Date(2025, 6, 3, 5, 0, 0, 0, time.UTC).Add(time.Duration(i) * time.Second),
			Lat:        &lat, Lon: &lon, Notes: "bench record",
		}
		id, err := RevisionID(c, nil, false)
		if err != nil {
			b.Fatal(err)
		}
		c.Revision = capture.Revision{ID: id, Stamp: clock.Now().String(), Device: "phone-3"}
		js, _ := json.Marshal(c)
		d.ids = append(d.ids, u)
		d.js = append(d.js, js)
	}
	for i := 0; i < benchRecords; i += benchBatch {
		raws := make([]json.RawMessage, benchBatch)
		for j := range raws {
			raws[j] = d.js[i+j]
		}
		body, _ := json.Marshal(PushRequest{Source: "phone-3", Revisions: raws})
		d.bodies = append(d.bodies, body)
	}
	benchCache = d
	return d
}

// rawInsert puts the same records into a plain bbolt file, 500 per
// transaction, keyed by UUID v7 with FillPercent 0.9 (the best raw case of
// PERFORMANCE.md).
func rawInsert(b *testing.B, d *benchData) time.Duration {
	db, err := bolt.Open(filepath.Join(b.TempDir(), "raw.db"), 0o600, nil)
	if err != nil {
		b.Fatal(err)
	}
	defer db.Close()
	start := time.Now()
	for i := 0; i < benchRecords; i += benchBatch {
		err := db.Update(func(tx *bolt.Tx) error {
			bk, err := tx.CreateBucketIfNotExists([]byte("captures"))
			if err != nil {
				return err
			}
			bk.FillPercent = 0.9
			for j := i; j < i+benchBatch; j++ {
				if err := bk.Put(d.ids[j][:], d.js[j]); err != nil {
					return err
				}
			}
			return nil
		})
		if err != nil {
			b.Fatal(err)
		}
	}
	return time.Since(start)
}

// storeInsert writes the same records with the capture store's
// PutCaptureRaw (record plus tag index, no validation), 500 per
// transaction: the least any versioned write into the store costs.
func storeInsert(b *testing.B, d *benchData) time.Duration {
	s, err := capture.Open(filepath.Join(b.TempDir(), "store.db"), nil)
	if err != nil {
		b.Fatal(err)
	}
	defer s.Close()
	recs := make([]*capture.Capture, len(d.js))
	for i, js := range d.js {
		recs[i] = new(capture.Capture)
		if err := json.Unmarshal(js, recs[i]); err != nil {
			b.Fatal(err)
		}
	}
	start := time.Now()
	for i := 0; i < benchRecords; i += benchBatch {
		err := s.Update(func(tx *capture.Tx) error {
			for j := i; j < i+benchBatch; j++ {
				if err := tx.PutCaptureRaw(recs[j]); err != nil {
					return err
				}
			}
			return nil
		})
		if err != nil {
			b.Fatal(err)
		}
	}
	return time.Since(start)
}

// BenchmarkSync100k measures, in one run, for 100,000 new revisions pushed
// in batches of 500: a raw bbolt insert of the same records, the push
// (decode + check IDs + merge + feed + capture store, one transaction per
// batch), a re-push of all of them (all "already had"), and pulling the
// whole 100,000-revision feed in pages of 500. It reports records/s for
// each and the ratios to the raw insert (merge/raw and remerge/raw count
// only the merge, push/raw and repush/raw include decoding the JSON
// bodies); merge/store is the merge against the capture store's own
// unversioned write of the same records.
//
//	go test ./sync -run '^$' -bench Sync100k -benchtime 1x
func BenchmarkSync100k(b *testing.B) {
	d := makeBenchData(b)
	var raw, storeRaw, push, repush, pull, merge, remerge time.Duration
	for n := 0; n < b.N; n++ {
		raw += rawInsert(b, d)
		storeRaw += storeInsert(b, d)
		s, err := capture.Open(filepath.Join(b.TempDir(), "camp.db"), nil)
		if err != nil {
			b.Fatal(err)
		}
		if err := s.PutStudy(storetest.Study()); err != nil {
			b.Fatal(err)
		}
		e, err := Open(s, nil)
		if err != nil {
			b.Fatal(err)
		}
		// pushAll returns the time of the whole push (decode and merge) and
		// of the merge alone.
		pushAll := func(want Status) (time.Duration, time.Duration) {
			var inMerge time.Duration
			start := time.Now()
			for _, body := range d.bodies {
				batch, err := DecodePush(bytes.NewReader(body))
				if err != nil {
					b.Fatal(err)
				}
				m := time.Now()
				rep, err := e.Push(batch)
				if err != nil {
					b.Fatal(err)
				}
				inMerge += time.Since(m)
				if rep.Results[0].Status != want {
					b.Fatalf("%+v", rep.Results[0])
				}
			}
			return time.Since(start), inMerge
		}
		p, m := pushAll(StatusStored)
		push, merge = push+p, merge+m
		p, m = pushAll(StatusAlreadyHad)
		repush, remerge = repush+p, remerge+m
		start := time.Now()
		got, cursor := 0, ""
		for {
			page, err := e.Pull(PullRequest{Cursor: cursor, Limit: benchBatch})
			if err != nil {
				b.Fatal(err)
			}
			got += len(page.Revisions)
			cursor = page.Next
			if !page.More {
				break
			}
		}
		pull += time.Since(start)
		if got != benchRecords {
			b.Fatalf("pulled %d", got)
		}
		e.Close()
		s.Close()
	}
	rate := func(d time.Duration) float64 { return float64(benchRecords*b.N) / d.Seconds() }
	b.ReportMetric(rate(raw), "raw_rec/s")
	b.ReportMetric(rate(push), "push_rec/s")
	b.ReportMetric(rate(repush), "repush_rec/s")
	b.ReportMetric(rate(pull), "pull_rec/s")
	b.ReportMetric(raw.Seconds()/push.Seconds(), "push/raw")
	b.ReportMetric(raw.Seconds()/repush.Seconds(), "repush/raw")
	b.ReportMetric(raw.Seconds()/merge.Seconds(), "merge/raw")
	b.ReportMetric(storeRaw.Seconds()/merge.Seconds(), "merge/store")
	b.ReportMetric(raw.Seconds()/remerge.Seconds(), "remerge/raw")
}
