// Package access is tagtally's access control: who may use the camp
// server, as what, and for which studies. It keeps accounts as tokens,
// one-time codes (the coordinator's first-start link, the join codes that
// enrol phones) and an audit log, all in its own buckets of the capture
// store's bbolt file (through capture.Store.Update/View and Tx.Bucket), so
// a backup of the data file carries them and a restore brings them back.
//
// How the parts fit:
//
//   - token.go: access tokens. A token is 256 random bits, written
//     base64url (43 characters); only its SHA-256 is stored, so the data
//     file (or a backup of it) does not hold usable credentials. Each
//     token has a kind (coordinator session, coordinator token for scripts,
//     device, peer server, this machine's commands), a role, a study scope,
//     a label, when it was made and last used, and whether it was revoked.
//     Authenticate reads the token from the file on every request and
//     caches nothing, so a revoke takes effect on the next request.
//   - code.go: one-time codes. The coordinator link printed by `tagtally
//     serve` carries a long claim code (single use, expires after 12 hours,
//     a new one cancels older unused ones). A join code is short enough to
//     type (12 characters, 60 bits), single use, expires after 15 minutes
//     and is bound to a study and a role. Codes are stored hashed too.
//   - audit.go: one entry per state-changing request: who (label and
//     token ID), the route, study, record and the answer's status.
//   - limit.go: attempt limits on code exchanges, per client address and
//     overall, so guessing join codes runs into refusals long before it
//     could succeed.
//
// Roles (the server's route table says which role each endpoint needs):
// coordinator (everything), recorder (captures and sync for its study),
// viewer (read and export its study, pull), peer (sync only, for its
// studies).
//
// Caveat: the audit entry is written after the change it describes, in
// its own transaction; a crash between the two loses the entry, never the
// change.
package access
