package server

import (
	"fmt"
	"net/http"
	"time"

	"github.com/labstack/echo/v4"
)

// backup answers GET /api/v1/backup with a consistent copy of the whole
// data file, taken while the server keeps running (`tagtally backup` uses
// it when the server holds the file). Its rule (routes.go) admits only a
// coordinator on this machine: the file holds every record, including the
// locations of animals.
func (s *Server) backup(c echo.Context) error {
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
