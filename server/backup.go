package server

import (
	"fmt"
	"net"
	"net/http"
	"time"

	"github.com/labstack/echo/v4"
)

// backup answers GET /api/v1/backup with a consistent copy of the whole
// data file, taken while the server keeps running (`tagtally backup` uses
// it when the server holds the file). Until access control exists it is
// answered only for requests from this machine: the file holds every
// record, including the locations of animals.
func (s *Server) backup(c echo.Context) error {
	host, _, err := net.SplitHostPort(c.Request().RemoteAddr)
	if ip := net.ParseIP(host); err != nil || ip == nil || !ip.IsLoopback() {
		return echo.NewHTTPError(http.StatusForbidden, "backups can be downloaded only on the server's own machine: run `tagtally backup PATH` there")
	}
	// A large file may take longer to send than the server's write timeout.
	_ = http.NewResponseController(c.Response().Writer).SetWriteDeadline(time.Now().Add(30 * time.Minute))
	name := fmt.Sprintf("tagtally-backup-%s.db", time.Now().UTC().Format("20060102-150405"))
	h := c.Response().Header()
	h.Set(echo.HeaderContentType, echo.MIMEOctetStream)
	h.Set(echo.HeaderContentDisposition, fmt.Sprintf("attachment; filename=%q", name))
	c.Response().WriteHeader(http.StatusOK)
	if _, err := s.store.Backup(c.Response()); err != nil {
		// The status is sent; the client sees a short body. Log why.
		s.log.Error("backup download failed", "err", err)
		return nil
	}
	return nil
}
