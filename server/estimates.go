package server

import (
	"fmt"
	"net/http"
	"sort"
	"strings"

	"github.com/labstack/echo/v4"

	"tagtally/analysis"
	"tagtally/capture"
	"tagtally/estimators"
	"tagtally/estimators/demography"
)

// estimatesAnswer is the body of GET .../estimates. Every number in it
// comes from the analysis report (package analysis, which calls the
// estimators); this file only chooses what to send next to it: the data
// checks that bear on the estimates and a plain-words caution when any is
// open. Nothing is computed here.
type estimatesAnswer struct {
	StudyID string           `json:"study_id"`
	Design  capture.Design   `json:"design"`
	Report  *analysis.Report `json:"report"`
	// Checks are the open data checks that change the capture histories
	// or covariates the estimates use.
	Checks []capture.Check `json:"checks"`
	// OpenChecks counts every open data check, those that do not bear on
	// the estimates included.
	OpenChecks int `json:"open_checks"`
	// Cautions are sentences the page shows above the numbers.
	Cautions []string `json:"cautions"`
}

// studyData reads a study and its live records in one transaction, so
// that checks and estimates describe the same data.
func (s *Server) studyData(studyID string) (*capture.Study, []capture.Capture, error) {
	var st *capture.Study
	var caps []capture.Capture
	err := s.store.View(func(tx *capture.Tx) error {
		var err error
		if st, err = tx.GetStudy(studyID); err != nil {
			return err
		}
		return tx.ForEachCapture(studyID, func(c *capture.Capture) error {
			if !c.Revision.Deleted {
				caps = append(caps, *c)
			}
			return nil
		})
	})
	if err != nil {
		return nil, nil, fmt.Errorf("study %q: %w", studyID, err)
	}
	return st, caps, nil
}

// studyEstimates answers GET /api/v1/studies/:study/estimates: the
// analysis report of the study (closed model table, or Jolly-Seber and
// CJS tables, or the robust design, as the study's design says), with the
// data checks that affect it.
func (s *Server) studyEstimates(c echo.Context) error {
	st, caps, err := s.studyData(c.Param("study"))
	if err != nil {
		return err
	}
	rep, err := analysis.FromCaptures(st, caps)
	if err != nil {
		return err
	}
	checks := capture.RunChecks(st, caps)
	ans := estimatesAnswer{StudyID: st.ID, Design: st.Design, Report: rep, Checks: []capture.Check{}, OpenChecks: len(checks)}
	for _, ch := range checks {
		if ch.AffectsEstimates {
			ans.Checks = append(ans.Checks, ch)
		}
	}
	ans.Cautions = estimateCautions(rep, len(ans.Checks), len(checks))
	return c.JSON(http.StatusOK, ans)
}

// estimateCautions words the general cautions: open checks, few animals,
// sections that could not be computed. The statistical assumptions of
// each method travel with its result in the report.
func estimateCautions(rep *analysis.Report, affecting, open int) []string {
	out := []string{}
	switch {
	case affecting > 0:
		out = append(out, fmt.Sprintf("%d open data %s change the capture histories these estimates are computed from. Until they are fixed, read every number below as provisional.", affecting, plural(affecting, "check", "checks")))
	case open > 0:
		out = append(out, fmt.Sprintf("%d open data %s do not change the capture histories but should still be reviewed.", open, plural(open, "check", "checks")))
	}
	if rep.Animals > 0 && rep.Animals < 20 {
		out = append(out, fmt.Sprintf("Only %d animals have been caught: standard errors and intervals from so few animals are rough.", rep.Animals))
	}
	sections := make([]string, 0, len(rep.Errors))
	for section := range rep.Errors {
		sections = append(sections, section)
	}
	sort.Strings(sections)
	for _, section := range sections {
		out = append(out, fmt.Sprintf("Not computed (%s): %s.", strings.ReplaceAll(section, "_", " "), rep.Errors[section]))
	}
	out = append(out, "Estimates rest on the assumptions listed with each method; if the field work broke one (for example animals left the area during a closed study), the numbers can be biased whatever their intervals say.")
	return out
}

func plural(n int, one, many string) string {
	if n == 1 {
		return one
	}
	return many
}

// summaryAnswer is the body of GET .../summary: the study at a glance.
// The demographic parts are the analysis report's (package
// estimators/demography); the recapture rate is the share of animals
// caught on more than one occasion, counted from the report's capture
// frequencies, with an exact binomial interval from demography.
type summaryAnswer struct {
	StudyID   string         `json:"study_id"`
	Name      string         `json:"name"`
	Design    capture.Design `json:"design"`
	Occasions int            `json:"occasions"`
	Stations  int            `json:"stations"`
	// Records counts live records of every event; NewMarks the new-mark
	// records among them.
	Records  int `json:"records"`
	NewMarks int `json:"new_marks"`
	// Animals are the animals with a capture history (tag chains caught
	// on at least one occasion); Captures their animal-occasions.
	Animals  int `json:"animals"`
	Captures int `json:"captures"`
	// Recaptured is the number of animals caught on two or more occasions.
	Recaptured    int                            `json:"recaptured"`
	RecaptureRate *recaptureRate                 `json:"recapture_rate,omitempty"`
	PerOccasion   []capture.OccasionSummary      `json:"per_occasion"`
	SexRatio      *demography.SexRatioResult     `json:"sex_ratio,omitempty"`
	Ages          *demography.AgeStructureResult `json:"age_structure,omitempty"`
	Frequencies   *demography.FrequencyTable     `json:"capture_frequencies,omitempty"`
	Mass          *demography.MassSummary        `json:"mass,omitempty"`
	OpenChecks    int                            `json:"open_checks"`
	Cautions      string                         `json:"cautions,omitempty"`
	PermitRef     string                         `json:"permit_ref,omitempty"`
}

// recaptureRate is the share of animals caught on more than one occasion
// with its exact (Clopper-Pearson) interval from demography.
type recaptureRate struct {
	Proportion float64 `json:"proportion"`
	estimators.Interval
}

// studySummary answers GET /api/v1/studies/:study/summary.
func (s *Server) studySummary(c echo.Context) error {
	st, caps, err := s.studyData(c.Param("study"))
	if err != nil {
		return err
	}
	rep, err := analysis.FromCaptures(st, caps)
	if err != nil {
		return err
	}
	ans := summaryAnswer{
		StudyID: st.ID, Name: st.Name, Design: st.Design, Occasions: len(st.Occasions), Stations: len(st.Stations),
		Records: len(caps), Animals: rep.Animals, PerOccasion: rep.Summary,
		SexRatio: rep.SexRatio, Ages: rep.Ages, Frequencies: rep.Frequencies, Mass: rep.Mass,
		OpenChecks: len(capture.RunChecks(st, caps)), Cautions: st.Cautions, PermitRef: st.PermitRef,
	}
	for _, rc := range caps {
		if rc.Event == capture.EventNewMark {
			ans.NewMarks++
		}
	}
	if f := rep.Frequencies; f != nil && f.Animals > 0 && len(f.F) > 0 {
		ans.Captures = f.Captures
		ans.Recaptured = f.Animals - f.F[0]
		iv, err := demography.ClopperPearson(ans.Recaptured, f.Animals, 0.95)
		if err != nil {
			return err
		}
		ans.RecaptureRate = &recaptureRate{Proportion: float64(ans.Recaptured) / float64(f.Animals), Interval: iv}
	}
	if ans.PerOccasion == nil {
		ans.PerOccasion = []capture.OccasionSummary{}
	}
	return c.JSON(http.StatusOK, ans)
}
