package server

import (
	"net/http"

	"github.com/google/uuid"
	"github.com/labstack/echo/v4"

	"tagtally/capture"
)

// captureAnswer is the body of a successful capture write: the record as
// stored (ID, derived occasion) and its soft findings, which the phone
// shows so the crew can check the animal while it is still in hand.
type captureAnswer struct {
	Capture  *capture.Capture `json:"capture"`
	Findings capture.Findings `json:"findings"`
}

// capturePage is one page of a capture list; NextCursor is "" after the
// last page.
type capturePage struct {
	Captures   []capture.Capture `json:"captures"`
	NextCursor string            `json:"next_cursor"`
}

// listCaptures answers GET .../captures?occasion=&station=&tag=&species=
// &deleted=true&limit=&cursor=.
func (s *Server) listCaptures(c echo.Context) error {
	f, err := captureFilter(c)
	if err != nil {
		return err
	}
	page, next, err := s.store.ListCaptures(c.Param("study"), f)
	if err != nil {
		return err
	}
	if page == nil {
		page = []capture.Capture{}
	}
	return c.JSON(http.StatusOK, capturePage{Captures: page, NextCursor: next})
}

// createCapture stores a new record as its first revision, through the
// sync engine, so that the write is in the change feed (and versioned) in
// the transaction that stores it.
func (s *Server) createCapture(c echo.Context) error {
	eng, err := s.engine()
	if err != nil {
		return err
	}
	rec, err := bindCapture(c, "")
	if err != nil {
		return err
	}
	stored, fs, err := eng.Create(rec) // a revision in the body is ignored
	if err != nil {
		return err
	}
	c.Set(ctxAuditRecord, stored.ID)
	c.Response().Header().Set(echo.HeaderLocation, c.Request().URL.Path+"/"+stored.ID)
	return c.JSON(http.StatusCreated, captureAnswer{stored, orEmpty(fs)})
}

func (s *Server) getCapture(c echo.Context) error {
	rec, err := s.store.GetCapture(c.Param("study"), c.Param("id"))
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, rec)
}

// updateCapture stores the body as a new revision. Its parent is the
// revision named in the body (revision.id: the one the editor read), or
// the current winner when none is named; an edit of a revision that has
// since been superseded is kept beside the newer one as a conflict for the
// coordinator, never written over it.
func (s *Server) updateCapture(c echo.Context) error {
	eng, err := s.engine()
	if err != nil {
		return err
	}
	rec, err := bindCapture(c, c.Param("id"))
	if err != nil {
		return err
	}
	stored, fs, err := eng.Update(rec)
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, captureAnswer{stored, orEmpty(fs)})
}

// deleteCapture stores a deletion (tombstone) revision of the current
// winner; the record stays readable and in its history.
func (s *Server) deleteCapture(c echo.Context) error {
	eng, err := s.engine()
	if err != nil {
		return err
	}
	if _, err := eng.Delete(c.Param("study"), c.Param("id")); err != nil {
		return err
	}
	return c.NoContent(http.StatusNoContent)
}

// bindCapture reads a capture body and reconciles it with the path: the
// study (and the ID, for an update) may be left out of the body, but if
// given must agree with the path.
func bindCapture(c echo.Context, id string) (*capture.Capture, error) {
	var rec capture.Capture
	if err := bindJSON(c, &rec); err != nil {
		return nil, err
	}
	study := c.Param("study")
	if rec.StudyID == "" {
		rec.StudyID = study
	} else if rec.StudyID != study {
		return nil, &capture.ValidationError{Field: "study_id", Message: "study_id " + rec.StudyID + " does not match the study in the address, " + study}
	}
	if id != "" {
		if rec.ID == "" {
			rec.ID = id
		} else if !sameID(rec.ID, id) {
			return nil, &capture.ValidationError{Field: "id", Message: "id " + rec.ID + " does not match the capture in the address, " + id}
		}
	}
	return &rec, nil
}

func sameID(a, b string) bool {
	ua, ea := uuid.Parse(a)
	ub, eb := uuid.Parse(b)
	if ea != nil || eb != nil {
		return a == b
	}
	return ua == ub
}

func captureFilter(c echo.Context) (capture.Filter, error) {
	f := capture.Filter{
		StationID: c.QueryParam("station"),
		TagID:     c.QueryParam("tag"),
		Species:   c.QueryParam("species"),
		After:     c.QueryParam("cursor"),
	}
	var err error
	if f.Occasion, err = queryInt(c, "occasion"); err != nil {
		return f, err
	}
	if f.Limit, err = queryInt(c, "limit"); err != nil {
		return f, err
	}
	if f.Limit > capture.MaxListLimit {
		return f, badRequest("limit", "limit may be at most %d", capture.MaxListLimit)
	}
	switch d := c.QueryParam("deleted"); d {
	case "", "false":
	case "true":
		f.IncludeDeleted = true
	default:
		return f, badRequest("deleted", "deleted must be true or false; got %q", d)
	}
	if f.After != "" {
		if _, err := uuid.Parse(f.After); err != nil {
			return f, badRequest("cursor", "cursor %q is not one this server gave out", f.After)
		}
	}
	return f, nil
}

func orEmpty(fs capture.Findings) capture.Findings {
	if fs == nil {
		return capture.Findings{}
	}
	return fs
}
