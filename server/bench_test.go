package server

import (
	"fmt"
	"io"
	"log/slog"
	"net/http/httptest"
	"strings"
	"testing"
	"time"

	"tagtally/capture"
	"tagtally/capture/storetest"
	"tagtally/server/access"
)

// Compare the two in one run: the ratio is the cost of HTTP, JSON and
// validation around the store's one-transaction write (each write is one
// committed, synced bbolt transaction, which dominates both).

func BenchmarkCreateCaptureAPI(b *testing.B) {
	store := storetest.Open(b)
	st := storetest.Study()
	if err := store.CreateStudy(st); err != nil {
		b.Fatal(err)
	}
	cfg := DefaultConfig()
	cfg.Logger = slog.New(slog.NewTextHandler(io.Discard, nil))
	srv, err := New(store, cfg)
	if err != nil {
		b.Fatal(err)
	}
	h := srv.Handler()
	secret, _ := issue(b, srv, access.NewToken{Kind: access.KindCoordinator, Label: "bench"})
	path := "/api/v1/studies/" + st.ID + "/captures"
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		body := strings.Replace(validCapture, "BF-0001", fmt.Sprintf("BF-%04d", i%10000), 1)
		req := httptest.NewRequest("POST", path, strings.NewReader(body))
		req.Header.Set("Content-Type", "application/json")
		req.Header.Set("Authorization", "Bearer "+secret)
		rec := httptest.NewRecorder()
		h.ServeHTTP(rec, req)
		if rec.Code != 201 {
			b.Fatalf("status %d: %s", rec.Code, rec.Body)
		}
	}
}

func BenchmarkCreateCaptureStore(b *testing.B) {
	store := storetest.Open(b)
	st := storetest.Study()
	if err := store.CreateStudy(st); err != nil {
		b.Fatal(err)
	}
	mass := 21.5
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		c := &capture.Capture{StudyID: st.ID, TagID: fmt.Sprintf("BF-%04d", i%10000), Event: capture.EventNewMark,
			Species: "bank vole", Sex: capture.SexFemale, Age: capture.AgeAdult, MassG: &mass, StationID: "A1",
			CapturedAt: time.Date(2025, 6, 2, 22, 10, 0, 0, time.UTC), Observer: "test crew"}
		if _, _, err := store.CreateCapture(c); err != nil {
			b.Fatal(err)
		}
	}
}
