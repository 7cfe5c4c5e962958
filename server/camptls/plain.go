package camptls

import (
	"net"
	"net/http"
	"strings"
)

// SetupHandler serves the setup page of a Manager as it is at each request.
type SetupHandler struct{ m *Manager }

func (h *SetupHandler) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	h.m.setup.Load().ServeHTTP(w, r)
}

// PlainHTTP is the handler for the server's plain-HTTP port when HTTPS is
// on. Setup paths go to the setup page. A phone on the network that opens
// the plain address's front page is sent to the setup page, because the
// app cannot work offline there (browsers allow service workers only on
// HTTPS or on the machine itself). Everything else, including every
// request from this machine, goes to app, so the coordinator's browser on
// the laptop and older scripts keep working over plain HTTP.
func PlainHTTP(app http.Handler, setup http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		switch {
		case r.URL.Path == SetupPath || strings.HasPrefix(r.URL.Path, SetupPath+"/"):
			setup.ServeHTTP(w, r)
		case (r.URL.Path == "/" || r.URL.Path == "/index.html") && !fromThisMachine(r):
			http.Redirect(w, r, SetupPath, http.StatusSeeOther)
		default:
			app.ServeHTTP(w, r)
		}
	})
}

// fromThisMachine reports whether the request came over loopback.
func fromThisMachine(r *http.Request) bool {
	host, _, err := net.SplitHostPort(r.RemoteAddr)
	if err != nil {
		return false
	}
	ip := net.ParseIP(host)
	return ip != nil && ip.IsLoopback()
}
