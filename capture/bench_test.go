package capture_test

import (
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"path/filepath"
	"testing"
	"time"

	"github.com/google/uuid"
	bolt "go.etcd.io/bbolt"

	"tagtally/capture"
)

// benchStudy has 10 daily occasions, 64 stations and no tag pattern
// limits beyond the series "BN-" and six digits.
func benchStudy() *capture.Study {
	start := time.Date(2025, 7, 1, 18, 0, 0, 0, time.UTC)
	st := &capture.Study{ID: "bench", Name: "benchmark grid", Design: capture.DesignOpen,
		TagSeries: []capture.TagSeries{{Name: "bench", Pattern: `BN-[0-9]{6}`}}}
	for i := 0; i < 10; i++ {
		s := start.Add(time.Duration(i) * 24 * time.Hour)
		st.Occasions = append(st.Occasions, capture.Occasion{Index: i + 1, Start: s, End: s.Add(12 * time.Hour)})
	}
	for i := 0; i < 64; i++ {
		st.Stations = append(st.Stations, capture.Station{ID: fmt.Sprintf("S%02d", i), Kind: capture.StationTrap})
	}
	return st
}

// benchCaptures makes n captures of n/5 animals over 10 occasions (each
// animal caught on 5 of them), in time order with UUID v7 IDs, as phones
// would create them. About 430 bytes of JSON each.
func benchCaptures(n int) []capture.Capture {
	st := benchStudy()
	r := rand.New(rand.NewPCG(3, 4))
	animals := n / 5
	out := make([]capture.Capture, 0, n)
	for occ := 0; occ < 10 && len(out) < n; occ++ {
		for a := 0; a < animals && len(out) < n; a++ {
			// Animal a is caught on occasions a%2, a%2+2, ... (5 of 10).
			if occ%2 != a%2 {
				continue
			}
			ev := capture.EventRecapture
			if occ < 2 {
				ev = capture.EventNewMark
			}
			mass := 15 + 20*r.Float64()
			lat, lon, acc := 52+r.Float64()/100, 0.4+r.Float64()/100, 3+5*r.Float64()
			id, _ := uuid.NewV7()
			out = append(out, capture.Capture{
				ID: id.String(), StudyID: "bench", TagID: fmt.Sprintf("BN-%06d", a), Event: ev,
				StationID: st.Stations[r.IntN(64)].ID, Species: "bank vole", Sex: capture.SexFemale,
				Age: capture.AgeAdult, MassG: &mass, Fate: capture.FateReleased, Observer: "crew 2",
				Device: "phone-7", CapturedAt: st.Occasions[occ].Start.Add(time.Duration(a) * time.Millisecond),
				Lat: &lat, Lon: &lon, AccuracyM: &acc, Notes: "bench record",
				Measurements: []capture.Measurement{{Name: "hind foot", Value: 17, Unit: "mm"}},
			})
		}
	}
	return out
}

// BenchmarkPutCaptures inserts 100,000 captures into a fresh store in
// batches, each batch one PutCaptures transaction (validation, occasion,
// tag-index findings and fsync included). Compare the batch sizes as
// ratios within one run.
func BenchmarkPutCaptures(b *testing.B) {
	const n = 100_000
	caps := benchCaptures(n)
	for _, batch := range []int{500, 5000} {
		b.Run(fmt.Sprintf("batch=%d", batch), func(b *testing.B) {
			b.ReportAllocs()
			for i := 0; i < b.N; i++ {
				b.StopTimer()
				s, err := capture.Open(filepath.Join(b.TempDir(), fmt.Sprintf("b%d.db", i)), nil)
				if err != nil {
					b.Fatal(err)
				}
				if err := s.CreateStudy(benchStudy()); err != nil {
					b.Fatal(err)
				}
				b.StartTimer()
				for lo := 0; lo < n; lo += batch {
					if _, err := s.PutCaptures(caps[lo:min(lo+batch, n)]); err != nil {
						b.Fatal(err)
					}
				}
				b.StopTimer()
				s.Close()
				b.StartTimer()
			}
			b.ReportMetric(float64(n)*float64(b.N)/b.Elapsed().Seconds(), "records/s")
		})
	}
	// The floor: the same JSON under the same keys straight into one bbolt
	// bucket, 500 per transaction, no validation and no tag index.
	b.Run("bbolt-only/batch=500", func(b *testing.B) {
		b.ReportAllocs()
		for i := 0; i < b.N; i++ {
			b.StopTimer()
			db, err := bolt.Open(filepath.Join(b.TempDir(), fmt.Sprintf("r%d.db", i)), 0o600, nil)
			if err != nil {
				b.Fatal(err)
			}
			b.StartTimer()
			for lo := 0; lo < n; lo += 500 {
				err := db.Update(func(tx *bolt.Tx) error {
					bk, err := tx.CreateBucketIfNotExists([]byte("captures"))
					if err != nil {
						return err
					}
					bk.FillPercent = 0.9
					for _, c := range caps[lo : lo+500] {
						u := uuid.MustParse(c.ID)
						v, err := json.Marshal(&c)
						if err != nil {
							return err
						}
						if err := bk.Put(append([]byte("bench\x00"), u[:]...), v); err != nil {
							return err
						}
					}
					return nil
				})
				if err != nil {
					b.Fatal(err)
				}
			}
			b.StopTimer()
			db.Close()
			b.StartTimer()
		}
		b.ReportMetric(float64(n)*float64(b.N)/b.Elapsed().Seconds(), "records/s")
	})
}

// BenchmarkHistories builds the histories, summary and m-array of 100,000
// captures (20,000 animals x 10 occasions): "build" from records in
// memory, "store" reading and decoding them from bbolt first.
func BenchmarkHistories(b *testing.B) {
	const n = 100_000
	caps := benchCaptures(n)
	st := benchStudy()
	b.Run("build", func(b *testing.B) {
		b.ReportAllocs()
		for i := 0; i < b.N; i++ {
			h, err := capture.BuildHistories(st, caps, nil)
			if err != nil || len(h.Animals) != n/5 {
				b.Fatalf("%v, %d animals", err, len(h.Animals))
			}
			_ = h.Summary()
			_ = h.MArray()
		}
		b.ReportMetric(float64(n)*float64(b.N)/b.Elapsed().Seconds(), "records/s")
	})
	b.Run("store", func(b *testing.B) {
		s, err := capture.Open(filepath.Join(b.TempDir(), "h.db"), nil)
		if err != nil {
			b.Fatal(err)
		}
		defer s.Close()
		if err := s.CreateStudy(st); err != nil {
			b.Fatal(err)
		}
		for lo := 0; lo < n; lo += 5000 {
			if _, err := s.PutCaptures(caps[lo : lo+5000]); err != nil {
				b.Fatal(err)
			}
		}
		b.ReportAllocs()
		b.ResetTimer()
		for i := 0; i < b.N; i++ {
			h, err := s.Histories("bench", nil)
			if err != nil || len(h.Animals) != n/5 {
				b.Fatalf("%v", err)
			}
			_ = h.Summary()
			_ = h.MArray()
		}
		b.ReportMetric(float64(n)*float64(b.N)/b.Elapsed().Seconds(), "records/s")
	})
}
