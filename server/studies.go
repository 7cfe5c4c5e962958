package server

import (
	"net/http"
	"time"

	"github.com/labstack/echo/v4"

	"tagtally/capture"
)

func (s *Server) listStudies(c echo.Context) error {
	list, err := s.store.ListStudies()
	if err != nil {
		return err
	}
	// A device or peer sees only the studies its token reaches.
	tok := tokenOf(c)
	mine := []capture.Study{}
	for _, st := range list {
		if tok.Allows(st.ID) {
			mine = append(mine, st)
		}
	}
	return c.JSON(http.StatusOK, map[string]any{"studies": mine})
}

func (s *Server) createStudy(c echo.Context) error {
	var st capture.Study
	if err := bindJSON(c, &st); err != nil {
		return err
	}
	if st.CreatedAt.IsZero() {
		st.CreatedAt = time.Now().UTC()
	}
	if err := s.store.CreateStudy(&st); err != nil {
		return err
	}
	c.Response().Header().Set(echo.HeaderLocation, c.Request().URL.Path+"/"+st.ID)
	return c.JSON(http.StatusCreated, &st)
}

func (s *Server) getStudy(c echo.Context) error {
	st, err := s.store.GetStudy(c.Param("study"))
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, st)
}

// updateStudy replaces an existing study. The ID comes from the address;
// a body that names another ID is refused. created_at is kept when left out.
func (s *Server) updateStudy(c echo.Context) error {
	var st capture.Study
	if err := bindJSON(c, &st); err != nil {
		return err
	}
	if st.ID != "" && st.ID != c.Param("study") {
		return &capture.ValidationError{Field: "id", Message: "id " + st.ID + " does not match the study in the address, " + c.Param("study")}
	}
	out, err := s.editStudy(c.Param("study"), func(old *capture.Study) error {
		st.ID = old.ID
		if st.CreatedAt.IsZero() {
			st.CreatedAt = old.CreatedAt
		}
		*old = st
		return nil
	})
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, out)
}

// editStudy reads a study, lets edit change it, and stores it. Edits are
// serialised by a mutex so two crews adding stations at once both land:
// the store offers no read-modify-write of a study in one transaction,
// and this server is the data file's only writer (bbolt's file lock).
func (s *Server) editStudy(id string, edit func(*capture.Study) error) (*capture.Study, error) {
	s.studyMu.Lock()
	defer s.studyMu.Unlock()
	st, err := s.store.GetStudy(id)
	if err != nil {
		return nil, err
	}
	if err := edit(st); err != nil {
		return nil, err
	}
	if err := s.store.PutStudy(st); err != nil {
		return nil, err
	}
	return st, nil
}
