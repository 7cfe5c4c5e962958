package server

import (
	"net/http"

	"github.com/labstack/echo/v4"
)

// route is one endpoint: method, path (echo syntax, :name is a path
// parameter), handler, and a line for GET /api/v1.
type route struct {
	method  string
	path    string
	handler echo.HandlerFunc
	about   string
}

// backupPath is named because the request-timeout middleware skips it: a
// backup of a large file may take longer than an ordinary request.
const backupPath = "/api/v1/backup"

// routes is the index of the API: every endpoint the server answers, in
// one table. To add an endpoint, add a row here and its handler in the
// file of its resource (studies.go, captures.go, ...). Captures and the
// study's occasions and stations live under their study.
func (s *Server) routes() []route {
	return []route{
		{http.MethodGet, "/healthz", s.health, "is the server up and the data file readable"},
		{http.MethodGet, "/api/v1", s.index, "this list of endpoints"},

		{http.MethodGet, "/api/v1/studies", s.listStudies, "list studies"},
		{http.MethodPost, "/api/v1/studies", s.createStudy, "create a study (409 if the ID exists)"},
		{http.MethodGet, "/api/v1/studies/:study", s.getStudy, "one study, with its occasions and stations"},
		{http.MethodPut, "/api/v1/studies/:study", s.updateStudy, "replace an existing study"},

		{http.MethodGet, "/api/v1/studies/:study/occasions", s.listOccasions, "the study's occasions"},
		{http.MethodPost, "/api/v1/studies/:study/occasions", s.addOccasion, "add one occasion (index 0 means next)"},
		{http.MethodPut, "/api/v1/studies/:study/occasions", s.replaceOccasions, "replace all occasions"},

		{http.MethodGet, "/api/v1/studies/:study/stations", s.listStations, "the study's stations"},
		{http.MethodPost, "/api/v1/studies/:study/stations", s.addStation, "add one station (409 if the ID exists)"},
		{http.MethodPut, "/api/v1/studies/:study/stations", s.replaceStations, "replace all stations"},
		{http.MethodGet, "/api/v1/studies/:study/checks", s.studyChecks, "data checks: problems in the records, each naming the records involved"},
		{http.MethodGet, "/api/v1/studies/:study/estimates", s.studyEstimates, "estimates for the study's design, with the data checks that affect them"},
		{http.MethodGet, "/api/v1/studies/:study/summary", s.studySummary, "animals, captures, recapture rate, sex ratio, age structure"},
		{http.MethodGet, "/api/v1/studies/:study/devices", s.studyDevices, "devices named on the records: counts, last capture, last push, conflicts"},
		{http.MethodGet, "/api/v1/studies/:study/conflicts", s.studyConflicts, "records with unresolved edit conflicts and every version to choose from"},

		{http.MethodGet, "/api/v1/studies/:study/captures", s.listCaptures, "captures, filtered by occasion, station, tag, species; paged with limit and cursor"},
		{http.MethodPost, "/api/v1/studies/:study/captures", s.createCapture, "create a capture; answers with the record and its findings"},
		{http.MethodGet, "/api/v1/studies/:study/captures/:id", s.getCapture, "one capture (deleted ones too)"},
		{http.MethodPut, "/api/v1/studies/:study/captures/:id", s.updateCapture, "replace a capture's body"},
		{http.MethodDelete, "/api/v1/studies/:study/captures/:id", s.deleteCapture, "mark a capture deleted (kept, can be reviewed)"},

		{http.MethodGet, "/api/v1/studies/:study/captures/:id/history", s.captureHistory, "every revision of a capture, its leaves and provisional winner"},
		{http.MethodPost, "/api/v1/studies/:study/captures/:id/resolve", s.resolveCapture, "end a conflict with a revision whose parents are all the leaves"},
		{http.MethodGet, "/api/v1/sync", s.syncInfo, "this server's replica ID and change-feed epoch"},
		{http.MethodPost, "/api/v1/sync/push", s.syncPush, "push a batch of revisions; a status per revision after the commit"},
		{http.MethodGet, "/api/v1/sync/pull", s.syncPull, "revisions after a cursor, one page, with the next cursor"},
		{http.MethodPost, "/api/v1/sync/peer", s.syncWithPeer, "sync with another tagtally server now (from this machine only)"},

		{http.MethodGet, exportPath, s.exportWorkbook, "the study's workbook for the program office (XLSX)"},
		{http.MethodGet, "/api/v1/studies/:study/export/:table", s.exportTable, "one table as CSV: histories.csv, captures.csv, individuals.csv, occasions.csv, closed.csv, ..."},
		{http.MethodPost, "/api/v1/studies/:study/import", s.importFile, "import a CSV, XLSX or phone outbox backup (?dry_run=true checks only); a report per row"},

		{http.MethodGet, backupPath, s.backup, "download a consistent copy of the data file (from this machine only)"},
		{http.MethodGet, "/*", s.appFiles, "the phone app and the coordinator's pages (/coord/), embedded"},
	}
}
