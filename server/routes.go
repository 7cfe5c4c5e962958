package server

import (
	"net/http"

	"github.com/labstack/echo/v4"
)

// route is one endpoint: method, path (echo syntax, :name is a path
// parameter), handler, a line for GET /api/v1, and what it needs (its
// access rule, guard.go; routes_access_test.go walks every route with
// every role against this column).
type route struct {
	method  string
	path    string
	handler echo.HandlerFunc
	about   string
	need    rule
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
		{http.MethodGet, "/healthz", s.health, "is the server up and the data file readable", ruleAnyone},
		{http.MethodGet, "/api/v1", s.index, "this list of endpoints", ruleAnyone},

		{http.MethodGet, "/api/v1/studies", s.listStudies, "list studies", ruleStudies},
		{http.MethodPost, "/api/v1/studies", s.createStudy, "create a study (409 if the ID exists)", ruleCoordinator},
		{http.MethodGet, "/api/v1/studies/:study", s.getStudy, "one study, with its occasions and stations", ruleReadStudy},
		{http.MethodPut, "/api/v1/studies/:study", s.updateStudy, "replace an existing study", ruleCoordStudy},

		{http.MethodGet, "/api/v1/studies/:study/occasions", s.listOccasions, "the study's occasions", ruleReadStudy},
		{http.MethodPost, "/api/v1/studies/:study/occasions", s.addOccasion, "add one occasion (index 0 means next)", ruleCoordStudy},
		{http.MethodPut, "/api/v1/studies/:study/occasions", s.replaceOccasions, "replace all occasions", ruleCoordStudy},

		{http.MethodGet, "/api/v1/studies/:study/stations", s.listStations, "the study's stations", ruleReadStudy},
		{http.MethodPost, "/api/v1/studies/:study/stations", s.addStation, "add one station (409 if the ID exists)", ruleCoordStudy},
		{http.MethodPut, "/api/v1/studies/:study/stations", s.replaceStations, "replace all stations", ruleCoordStudy},
		{http.MethodGet, "/api/v1/studies/:study/checks", s.studyChecks, "data checks: problems in the records, each naming the records involved", ruleReadStudy},
		{http.MethodGet, "/api/v1/studies/:study/estimates", s.studyEstimates, "estimates for the study's design, with the data checks that affect them", ruleReadStudy},
		{http.MethodGet, "/api/v1/studies/:study/summary", s.studySummary, "animals, captures, recapture rate, sex ratio, age structure", ruleReadStudy},
		{http.MethodGet, "/api/v1/studies/:study/devices", s.studyDevices, "devices named on the records: counts, last capture, last push, conflicts", ruleReadStudy},
		{http.MethodGet, "/api/v1/studies/:study/conflicts", s.studyConflicts, "records with unresolved edit conflicts and every version to choose from", ruleReadStudy},

		{http.MethodGet, "/api/v1/studies/:study/captures", s.listCaptures, "captures, filtered by occasion, station, tag, species; paged with limit and cursor", ruleReadStudy},
		{http.MethodPost, "/api/v1/studies/:study/captures", s.createCapture, "create a capture; answers with the record and its findings", ruleWriteStudy},
		{http.MethodGet, "/api/v1/studies/:study/captures/:id", s.getCapture, "one capture (deleted ones too)", ruleReadStudy},
		{http.MethodPut, "/api/v1/studies/:study/captures/:id", s.updateCapture, "replace a capture's body", ruleWriteStudy},
		{http.MethodDelete, "/api/v1/studies/:study/captures/:id", s.deleteCapture, "mark a capture deleted (kept, can be reviewed)", ruleWriteStudy},

		{http.MethodGet, "/api/v1/studies/:study/captures/:id/history", s.captureHistory, "every revision of a capture, its leaves and provisional winner", ruleReadStudy},
		{http.MethodPost, "/api/v1/studies/:study/captures/:id/resolve", s.resolveCapture, "end a conflict with a revision whose parents are all the leaves", ruleCoordStudy},
		{http.MethodGet, "/api/v1/sync", s.syncInfo, "this server's replica ID and change-feed epoch", ruleSyncRead},
		{http.MethodPost, "/api/v1/sync/push", s.syncPush, "push a batch of revisions; a status per revision after the commit", ruleSyncPush},
		{http.MethodGet, "/api/v1/sync/pull", s.syncPull, "revisions after a cursor, one page, with the next cursor", ruleSyncRead},
		{http.MethodPost, "/api/v1/sync/peer", s.syncWithPeer, "sync with another tagtally server now (from this machine only)", ruleCoordLocal},

		{http.MethodGet, exportPath, s.exportWorkbook, "the study's workbook for the program office (XLSX)", ruleExportStudy},
		{http.MethodGet, "/api/v1/studies/:study/export/:table", s.exportTable, "one table as CSV: histories.csv, captures.csv, individuals.csv, occasions.csv, closed.csv, ...", ruleExportStudy},
		{http.MethodPost, "/api/v1/studies/:study/import", s.importFile, "import a CSV, XLSX or phone outbox backup (?dry_run=true checks only); a report per row", ruleCoordStudy},

		{http.MethodPost, "/api/v1/access/claim", s.claim, "exchange the coordinator link's code for a coordinator session (cookie and CSRF token)", ruleCodeExchange},
		{http.MethodPost, "/api/v1/join", s.join, "exchange a join code for this device's token (bound to one study and role)", ruleCodeExchange},
		{http.MethodGet, "/api/v1/access/me", s.me, "what the request's token is (and a session's CSRF token)", ruleSignedIn},
		{http.MethodPost, "/api/v1/access/sign-out", s.signOut, "revoke the request's own token (end a session, a phone leaves)", ruleSignedIn},
		{http.MethodGet, "/api/v1/access/tokens", s.listTokens, "devices, peers, sessions and script tokens, revoked ones too", ruleCoordinator},
		{http.MethodPost, "/api/v1/access/tokens", s.createToken, "make a peer token (for some studies) or a coordinator token for scripts; shown once", ruleCoordinator},
		{http.MethodPost, "/api/v1/access/tokens/:id/revoke", s.revokeToken, "revoke a token now (a lost phone); its synced records stay", ruleCoordinator},
		{http.MethodPost, "/api/v1/studies/:study/join-codes", s.createJoinCode, "a single-use join code for the study and a role (recorder or viewer), with its link and QR code; 15 minutes", ruleCoordStudy},
		{http.MethodPost, "/api/v1/access/claim-link", s.newClaimLink, "a new coordinator link; older unused ones stop working", ruleCoordLocal},
		{http.MethodGet, "/api/v1/access/audit", s.auditLog, "the audit log: who changed what, newest first (limit, before)", ruleCoordinator},

		{http.MethodGet, backupPath, s.backup, "download a consistent copy of the data file (from this machine only)", ruleCoordLocal},
		{http.MethodGet, "/*", s.appFiles, "the phone app and the coordinator's pages (/coord/), embedded", ruleAnyone},
	}
}
