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

// rawDB is a plain bbolt file taking the same records, 500 per
// transaction, keyed by UUID v7 with FillPercent 0.9 (the best raw case of
// PERFORMANCE.md).
type rawDB struct{ db *bolt.DB }

func openRaw(b *testing.B, name string) *rawDB {
	db, err := bolt.Open(filepath.Join(b.TempDir(), name), 0o600, nil)
	if err != nil {
		b.Fatal(err)
	}
	return &rawDB{db}
}

// insert writes records [i, i+benchBatch) in one transaction and returns
// how long it took.
func (r *rawDB) insert(b *testing.B, d *benchData, i int) time.Duration {
	start := time.Now()
	err := r.db.Update(func(tx *bolt.Tx) error {
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
	return time.Since(start)
}

// storeDB writes the same records with the capture store's PutCaptureRaw
// (record plus tag index, no validation), 500 per transaction: the least
// any versioned write into the store costs.
type storeDB struct {
	s    *capture.Store
	recs []*capture.Capture
}

func openStoreDB(b *testing.B, d *benchData) *storeDB {
	s, err := capture.Open(filepath.Join(b.TempDir(), "store.db"), nil)
	if err != nil {
		b.Fatal(err)
	}
	recs := make([]*capture.Capture, len(d.js))
	for i, js := range d.js {
		recs[i] = new(capture.Capture)
		if err := json.Unmarshal(js, recs[i]); err != nil {
			b.Fatal(err)
		}
	}
	return &storeDB{s, recs}
}

func (sd *storeDB) insert(b *testing.B, i int) time.Duration {
	start := time.Now()
	err := sd.s.Update(func(tx *capture.Tx) error {
		for j := i; j < i+benchBatch; j++ {
			if err := tx.PutCaptureRaw(sd.recs[j]); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		b.Fatal(err)
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
// unversioned write of the same records (store/raw is that write's ratio to
// raw: what any versioned write could reach at most).
//
// The machines these run on are shared and their disk and CPU speed drift
// by a factor of two within a minute, so the compared writes are
// interleaved batch by batch: batch i goes to the raw file, the plain
// store and the push in turn (and each re-pushed batch is paired with
// another raw insert of its records into a fresh file), so that both sides
// of each ratio see the same conditions.
//
//	go test ./sync -run '^$' -bench Sync100k -benchtime 1x
func BenchmarkSync100k(b *testing.B) {
	d := makeBenchData(b)
	var raw, raw2, storeRaw, push, repush, pull, merge, remerge time.Duration
	for n := 0; n < b.N; n++ {
		rdb, rdb2, sdb := openRaw(b, "raw.db"), openRaw(b, "raw2.db"), openStoreDB(b, d)
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
		// pushOne returns the time of the whole push of batch k (decode
		// and merge) and of the merge alone.
		pushOne := func(k int, want Status) (time.Duration, time.Duration) {
			start := time.Now()
			batch, err := DecodePush(bytes.NewReader(d.bodies[k]))
			if err != nil {
				b.Fatal(err)
			}
			m := time.Now()
			rep, err := e.Push(batch)
			if err != nil {
				b.Fatal(err)
			}
			end := time.Now()
			if rep.Results[0].Status != want {
				b.Fatalf("%+v", rep.Results[0])
			}
			return end.Sub(start), end.Sub(m)
		}
		for k := range d.bodies {
			raw += rdb.insert(b, d, k*benchBatch)
			storeRaw += sdb.insert(b, k*benchBatch)
			p, m := pushOne(k, StatusStored)
			push, merge = push+p, merge+m
		}
		for k := range d.bodies {
			raw2 += rdb2.insert(b, d, k*benchBatch)
			p, m := pushOne(k, StatusAlreadyHad)
			repush, remerge = repush+p, remerge+m
		}
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
		sdb.s.Close()
		rdb.db.Close()
		rdb2.db.Close()
	}
	rate := func(d time.Duration) float64 { return float64(benchRecords*b.N) / d.Seconds() }
	b.ReportMetric(rate(raw), "raw_rec/s")
	b.ReportMetric(rate(push), "push_rec/s")
	b.ReportMetric(rate(repush), "repush_rec/s")
	b.ReportMetric(rate(pull), "pull_rec/s")
	b.ReportMetric(raw.Seconds()/push.Seconds(), "push/raw")
	b.ReportMetric(raw2.Seconds()/repush.Seconds(), "repush/raw")
	b.ReportMetric(raw.Seconds()/merge.Seconds(), "merge/raw")
	b.ReportMetric(storeRaw.Seconds()/merge.Seconds(), "merge/store")
	b.ReportMetric(raw.Seconds()/storeRaw.Seconds(), "store/raw")
	b.ReportMetric(raw2.Seconds()/remerge.Seconds(), "remerge/raw")
}
