package server

import (
	"net/http"

	"github.com/labstack/echo/v4"
)

// health answers GET /healthz: 200 when the data file can be read. The
// body names the program so `tagtally backup` can tell a tagtally server
// from something else on the port.
func (s *Server) health(c echo.Context) error {
	if _, err := s.store.ListStudies(); err != nil {
		return err
	}
	return c.JSON(http.StatusOK, map[string]string{"status": "ok", "service": "tagtally"})
}

// index answers GET /api/v1 with the route table.
func (s *Server) index(c echo.Context) error {
	type entry struct {
		Method string `json:"method"`
		Path   string `json:"path"`
		About  string `json:"about"`
		Access string `json:"access"`
	}
	var out []entry
	for _, r := range s.routes() {
		out = append(out, entry{r.method, r.path, r.about, r.need.name})
	}
	return c.JSON(http.StatusOK, map[string]any{"endpoints": out})
}
