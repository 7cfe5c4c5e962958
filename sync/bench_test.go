package sync

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"path/filepath"
	"slices"
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
	return timed(b, func() error {
		return r.db.Update(func(tx *bolt.Tx) error {
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
	})
}

// timed runs write (one bbolt transaction), failing the benchmark on an
// error, and returns how long it took.
func timed(b *testing.B, write func() error) time.Duration {
	start := time.Now()
	if err := write(); err != nil {
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
	return timed(b, func() error {
		return sd.s.Update(func(tx *capture.Tx) error {
			for j := i; j < i+benchBatch; j++ {
				if err := tx.PutCaptureRaw(sd.recs[j]); err != nil {
					return err
				}
			}
			return nil
		})
	})
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

// floorData is what merging each benchmark record writes, encoded before
// any timing with the encoders the merge uses: the capture record as the
// capture store keeps it (JSON, keyed study 0x00 UUID) and its tag-index
// entry (study 0x00 tag 0x00 UUID -> 12 bytes; the layout is documented on
// capture.Store), and sync's revision, record state and feed entry.
type floorData struct {
	capKey, capVal, tagKey, revKey, revVal, recKey, recVal, feedVal [][]byte
}

func makeFloorData(b *testing.B, d *benchData) *floorData {
	f := &floorData{}
	for i, js := range d.js {
		c := new(capture.Capture)
		if err := json.Unmarshal(js, c); err != nil {
			b.Fatal(err)
		}
		body, err := CanonicalBody(c)
		if err != nil {
			b.Fatal(err)
		}
		c.Revision.Depth = 1
		capVal, err := json.Marshal(c)
		if err != nil {
			b.Fatal(err)
		}
		id := d.ids[i][:]
		study := append([]byte(c.StudyID), 0)
		f.capKey = append(f.capKey, append(slices.Clone(study), id...))
		f.capVal = append(f.capVal, capVal)
		f.tagKey = append(f.tagKey, append(append(append(slices.Clone(study), c.TagID...), 0), id...))
		revKey, err := revisionKey(c.ID, c.Revision.ID)
		if err != nil {
			b.Fatal(err)
		}
		f.revKey = append(f.revKey, revKey)
		f.revVal = append(f.revVal, encodeRevision(c, body))
		f.recKey = append(f.recKey, id)
		f.recVal = append(f.recVal, encodeRecordState(recordState{study: c.StudyID, leaves: []leaf{
			{id: c.Revision.ID, depth: 1, stamp: c.Revision.Stamp, device: c.Revision.Device}}}))
		f.feedVal = append(f.feedVal, encodeFeedEntry(feedEntry{captureID: c.ID, revID: c.Revision.ID, source: "phone-3"}))
	}
	return f
}

// floorInsert writes records [i, i+benchBatch) in one transaction doing
// only the bbolt operations a merge of new revisions cannot avoid, with
// every key and value already encoded: the capture store's part (look up
// the existing record, put the record, put its tag-index entry) and, when
// withSync is set, sync's part as well (look up the record state, put the
// revision, the record state and a feed entry under the next sequence).
func floorInsert(b *testing.B, db *bolt.DB, f *floorData, i int, withSync bool) time.Duration {
	return timed(b, func() error {
		return db.Update(func(tx *bolt.Tx) error {
			bucket := func(name string, fill float64) *bolt.Bucket {
				bk, err := tx.CreateBucketIfNotExists([]byte(name))
				if err != nil {
					b.Fatal(err)
				}
				bk.FillPercent = fill
				return bk
			}
			// Fill factors as the store and sync set them.
			caps, tags := bucket("captures", 0.9), bucket("tag_index", bolt.DefaultFillPercent)
			revs, recs, feed := bucket("sync_revisions", 0.9), bucket("sync_records", 0.9), bucket("sync_feed", 0.9)
			tagVal := make([]byte, 12)
			for j := i; j < i+benchBatch; j++ {
				if withSync && recs.Get(f.recKey[j]) != nil {
					b.Fatal("record state exists")
				}
				if caps.Get(f.capKey[j]) != nil {
					b.Fatal("record exists")
				}
				if err := caps.Put(f.capKey[j], f.capVal[j]); err != nil {
					return err
				}
				if err := tags.Put(f.tagKey[j], tagVal); err != nil {
					return err
				}
				if !withSync {
					continue
				}
				if err := revs.Put(f.revKey[j], f.revVal[j]); err != nil {
					return err
				}
				if err := recs.Put(f.recKey[j], f.recVal[j]); err != nil {
					return err
				}
				seq, err := feed.NextSequence()
				if err != nil {
					return err
				}
				if err := feed.Put(binary.BigEndian.AppendUint64(nil, seq), f.feedVal[j]); err != nil {
					return err
				}
			}
			return nil
		})
	})
}

// BenchmarkWriteFloors measures how fast any merge of new revisions could
// be with the present storage layout, as ratios to the raw insert of
// BenchmarkSync100k in the same run (batches interleaved, as there):
//
//   - storefloor/raw: the capture store's own bbolt operations for each
//     record (look-up, record, tag-index entry), values encoded in advance:
//     no JSON encoding, no validation, no sync.
//   - mergefloor/raw: the same plus sync's operations (record state
//     look-up, revision, record state, feed entry), values encoded in
//     advance: no decoding, hashing, merge rule or encoding.
//
// A merge that keeps the capture record and its tag index in the same
// transaction as the revision (the design's rule: either all of it commits
// or none) cannot be faster than storefloor; the present layout cannot be
// faster than mergefloor.
//
//	go test ./sync -run '^$' -bench WriteFloors -benchtime 1x
func BenchmarkWriteFloors(b *testing.B) {
	d := makeBenchData(b)
	f := makeFloorData(b, d)
	var raw, store, merge time.Duration
	for n := 0; n < b.N; n++ {
		rdb, sdb, mdb := openRaw(b, "raw.db"), openRaw(b, "store.db"), openRaw(b, "merge.db")
		for k := 0; k < benchRecords; k += benchBatch {
			raw += rdb.insert(b, d, k)
			store += floorInsert(b, sdb.db, f, k, false)
			merge += floorInsert(b, mdb.db, f, k, true)
		}
		rdb.db.Close()
		sdb.db.Close()
		mdb.db.Close()
	}
	b.ReportMetric(raw.Seconds()/store.Seconds(), "storefloor/raw")
	b.ReportMetric(raw.Seconds()/merge.Seconds(), "mergefloor/raw")
}
