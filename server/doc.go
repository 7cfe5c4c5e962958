// Package server is tagtally's HTTP side: an echo v4 JSON API over the
// capture store, served to the crews' phones on the camp network and to the
// coordinator's browser.
//
// How the parts fit:
//
//   - routes.go is the index of the API: one table lists every endpoint,
//     its handler and one line saying what it does. Add an endpoint by
//     adding a row there and a handler method in the file of its resource.
//   - Handlers are methods on *Server, one file per resource (studies.go,
//     occasions.go, stations.go, captures.go, backup.go, health.go). Each
//     binds the request, calls the store once and answers.
//   - errors.go chooses every HTTP status in one place: capture.ErrInvalid
//     (and *capture.ValidationError) is 422 with {"error", "field"},
//     capture.ErrNotFound 404, capture.ErrConflict 409, a body over
//     the limit 413, malformed JSON or unknown fields 400; sync's
//     sentinels: a push too large 413, a bad cursor or revision 400, stale
//     leaves or a missing parent 409, a failing peer 502. Anything else is
//     a 500 whose details go to the log, never to the client.
//   - server.go wires echo to an http.Server with header, read, write and
//     idle timeouts and a body-size limit, and shuts down gracefully:
//     when the context given to Serve ends, the listener closes, requests
//     in flight (writes included) finish, and only then does Serve return,
//     so the caller can close the store without cutting a write short.
//
// Writes are acknowledged (2xx) only after the store's bbolt transaction
// has committed, and bbolt syncs the file on commit: an acknowledged write
// survives a killed process or a power cut.
//
//   - guard.go is access control: each route's row names its rule (the
//     roles that may use it, whether :study must be in the token's scope,
//     loopback only), and one middleware checks it on every request,
//     reading the token from the store each time (package access), so a
//     revoke takes effect at once. A browser session comes as a cookie
//     and must send its CSRF token with every change; every
//     state-changing request with a token is written to the audit log.
//     Every answer carries a CSP allowing only the app's own scripts,
//     frame denial, nosniff and no referrer.
//
// Caveat: the backup and the peer sync stay answered only for requests
// from this machine (loopback), on top of needing the coordinator.
package server
