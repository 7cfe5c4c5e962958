package sync

import "errors"

// Errors of the sync package. Functions wrap them with a prefix; test with
// errors.Is.
var (
	// ErrBadStamp: a clock stamp is not in the form Stamp.String makes.
	ErrBadStamp = errors.New("bad clock stamp")
	// ErrBadRevision: a pushed revision is malformed (no UUID, no study,
	// repeated parents, text that is not UTF-8, a non-finite number...).
	ErrBadRevision = errors.New("bad revision")
	// ErrRevisionID: a revision's ID is not the hash of its parents, body
	// and deleted flag (see RevisionID).
	ErrRevisionID = errors.New("revision ID does not match its content")
	// ErrMissingParent: a revision names a parent this replica does not
	// have yet. Not permanent: send the parent first, then this again.
	ErrMissingParent = errors.New("parent revision not known here yet")
	// ErrUnknownStudy: a revision belongs to a study this replica does not
	// have. Sync moves capture records, not study definitions.
	ErrUnknownStudy = errors.New("study not known here")
	// ErrStudyChanged: a revision moves a record to another study.
	ErrStudyChanged = errors.New("a record cannot move to another study")
	// ErrTooLarge: a push holds more revisions or bytes than allowed.
	ErrTooLarge = errors.New("push too large")
	// ErrBadCursor: a pull cursor is not one this package made.
	ErrBadCursor = errors.New("bad cursor")
	// ErrStaleLeaves: a resolution or edit was based on revisions that are
	// no longer the record's leaves; read the record again.
	ErrStaleLeaves = errors.New("the record has changed since it was read")
	// ErrPeer: a peer answered with an error or something unreadable.
	ErrPeer = errors.New("peer")
)
