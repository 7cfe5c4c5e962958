package sync

import (
	"errors"
	"fmt"
	"slices"
)

// ErrOutOfScope: a pushed revision belongs to a study the sender's access
// token does not reach. Rejected alone; the rest of the batch is applied.
var ErrOutOfScope = errors.New("study outside this sender's access")

// Restrict rejects, revision by revision, those whose study allowed
// refuses, as if they had not decoded: Push then answers each with
// status rejected and the reason, and applies the others. The study
// named by a revision is the one it is stored under: a record already
// stored under another study is refused by the merge (ErrStudyChanged),
// so a revision cannot reach a study by naming one it may use.
func (b *PushBatch) Restrict(allowed func(study string) bool) {
	for i, c := range b.Revisions {
		if c == nil || allowed(c.StudyID) {
			continue
		}
		b.Revisions[i] = nil
		b.Errors[i] = fmt.Errorf("%w: capture %s is in study %q", ErrOutOfScope, c.ID, c.StudyID)
	}
}

// filtered reports whether the pull keeps only some studies.
func (r PullRequest) filtered() bool { return r.Study != "" || r.Studies != nil }

// keeps reports whether a record of this study belongs in the pull.
func (r PullRequest) keeps(study string) bool {
	if r.Study != "" && study != r.Study {
		return false
	}
	return r.Studies == nil || slices.Contains(r.Studies, study)
}
