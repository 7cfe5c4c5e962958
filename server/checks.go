package server

import (
	"net/http"

	"github.com/labstack/echo/v4"

	"tagtally/capture"
)

// checksAnswer is the body of GET .../checks: the study's data checks, the
// catalogue of check kinds (so a client can show what each code means even
// when none is found), and counts by code.
type checksAnswer struct {
	StudyID string              `json:"study_id"`
	Checks  []capture.Check     `json:"checks"`
	Kinds   []capture.CheckKind `json:"kinds"`
	Counts  map[string]int      `json:"counts"`
}

// studyChecks answers GET /api/v1/studies/:study/checks. The checks are
// computed afresh from the stored records on every request
// (capture.Store.Checks).
func (s *Server) studyChecks(c echo.Context) error {
	checks, err := s.store.Checks(c.Param("study"))
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, newChecksAnswer(c.Param("study"), checks))
}

func newChecksAnswer(studyID string, checks []capture.Check) checksAnswer {
	if checks == nil {
		checks = []capture.Check{}
	}
	counts := make(map[string]int, len(capture.CheckKinds))
	for _, ch := range checks {
		counts[ch.Code]++
	}
	return checksAnswer{StudyID: studyID, Checks: checks, Kinds: capture.CheckKinds, Counts: counts}
}
