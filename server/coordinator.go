package server

import (
	"net/http"
	"slices"
	"sort"
	"strings"
	stdsync "sync"
	"time"

	"github.com/labstack/echo/v4"

	"tagtally/capture"
	"tagtally/pwa"
	"tagtally/server/appfiles"
)

// deviceRow is one device of GET .../devices: what the study's records say
// about it, and what sync received from it.
type deviceRow struct {
	// Device is the device named on the records ("" for records that name
	// none).
	Device    string   `json:"device"`
	Observers []string `json:"observers"`
	// Records are its live records in the study, Deleted its deleted ones.
	Records int `json:"records"`
	Deleted int `json:"deleted"`
	// FirstCapture and LastCapture span the capture times of its records.
	FirstCapture *time.Time `json:"first_capture,omitempty"`
	LastCapture  *time.Time `json:"last_capture,omitempty"`
	// LastWritten is the latest revision stamp of its records (when the
	// newest version of one of them was written), if any is stamped.
	LastWritten *time.Time `json:"last_written,omitempty"`
	// Conflicts counts its records with unresolved edit conflicts.
	Conflicts int `json:"conflicts"`
	// LastPush and the counts are sync's record of pushes sent under this
	// device name (all studies); nil when it never pushed under it.
	LastPush   *time.Time `json:"last_push,omitempty"`
	Stored     int        `json:"pushed_stored"`
	AlreadyHad int        `json:"pushed_already_had"`
	Rejected   int        `json:"pushed_rejected"`
}

// studyDevices answers GET /api/v1/studies/:study/devices: one row per
// device named on the study's records, busiest first.
func (s *Server) studyDevices(c echo.Context) error {
	studyID := c.Param("study")
	all, err := s.store.Captures(studyID, true)
	if err != nil {
		return err
	}
	rows := map[string]*deviceRow{}
	for i := range all {
		rc := &all[i]
		d := rows[rc.Device]
		if d == nil {
			d = &deviceRow{Device: rc.Device, Observers: []string{}}
			rows[rc.Device] = d
		}
		if rc.Revision.Deleted {
			d.Deleted++
			continue
		}
		d.Records++
		if rc.Observer != "" && !slices.Contains(d.Observers, rc.Observer) {
			d.Observers = append(d.Observers, rc.Observer)
		}
		if !rc.CapturedAt.IsZero() {
			t := rc.CapturedAt
			if d.FirstCapture == nil || t.Before(*d.FirstCapture) {
				d.FirstCapture = &t
			}
			if d.LastCapture == nil || t.After(*d.LastCapture) {
				d.LastCapture = &t
			}
		}
		if t, ok := capture.StampTime(rc.Revision.Stamp); ok && (d.LastWritten == nil || t.After(*d.LastWritten)) {
			d.LastWritten = &t
		}
		if rc.Revision.Conflict {
			d.Conflicts++
		}
	}
	out := make([]deviceRow, 0, len(rows))
	eng, engErr := s.engine()
	if engErr != nil {
		s.log.Warn("devices: sync engine unavailable; push times left out", "err", engErr)
	}
	for _, d := range rows {
		sort.Strings(d.Observers)
		if engErr == nil && d.Device != "" {
			src, err := eng.Source(d.Device)
			if err != nil {
				return err
			}
			if !src.LastPush.IsZero() {
				t := src.LastPush
				d.LastPush, d.Stored, d.AlreadyHad, d.Rejected = &t, src.Stored, src.AlreadyHad, src.Rejected
			}
		}
		out = append(out, *d)
	}
	sort.Slice(out, func(i, j int) bool {
		if out[i].Records != out[j].Records {
			return out[i].Records > out[j].Records
		}
		return out[i].Device < out[j].Device
	})
	return c.JSON(http.StatusOK, map[string]any{"study_id": studyID, "devices": out})
}

// conflictRow is one record with an unresolved edit conflict: the
// provisional winner that estimates use now, and every leaf version to
// choose from.
type conflictRow struct {
	Capture capture.Capture   `json:"capture"`
	Winner  string            `json:"winner"`
	Leaves  []capture.Capture `json:"leaves"`
}

// studyConflicts answers GET /api/v1/studies/:study/conflicts. Resolving
// one is POST .../captures/:id/resolve with the leaves listed here, which
// stores a new version whose parents are all of them (sync.Engine.Resolve);
// the other versions stay in the record's history.
func (s *Server) studyConflicts(c echo.Context) error {
	studyID := c.Param("study")
	caps, err := s.store.Captures(studyID, true)
	if err != nil {
		return err
	}
	eng, err := s.engine()
	if err != nil {
		return err
	}
	out := []conflictRow{}
	for _, rc := range caps {
		if !rc.Revision.Conflict {
			continue
		}
		h, err := eng.History(studyID, rc.ID)
		if err != nil {
			return err
		}
		row := conflictRow{Capture: rc, Winner: h.Winner, Leaves: []capture.Capture{}}
		for _, r := range h.Revisions {
			if slices.Contains(h.Leaves, r.Revision.ID) {
				row.Leaves = append(row.Leaves, r)
			}
		}
		out = append(out, row)
	}
	return c.JSON(http.StatusOK, map[string]any{"study_id": studyID, "conflicts": out})
}

// appState holds the handler of the embedded app files, made on first use.
type appState struct {
	once stdsync.Once
	h    http.Handler
	err  error
}

var app appState

// appFiles answers GET for every path no other route takes: the phone app
// (pwa/static) and the coordinator's pages under /coord/, with the
// caching rules of package appfiles. Unknown API paths stay JSON 404s.
func (s *Server) appFiles(c echo.Context) error {
	if strings.HasPrefix(c.Request().URL.Path, "/api/") {
		return echo.ErrNotFound
	}
	app.once.Do(func() { app.h, app.err = appfiles.New(pwa.Files(), pwa.Version()) })
	if app.err != nil {
		return app.err
	}
	app.h.ServeHTTP(c.Response(), c.Request())
	return nil
}
