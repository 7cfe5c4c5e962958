package sync

import (
	"errors"
	"testing"

	"tagtally/capture"
)

// Restrict turns revisions of studies outside the scope into per-revision
// rejections and leaves the others, and ones that did not decode, alone.
func TestRestrictRejectsOutOfScopeRevisions(t *testing.T) {
	in := body("01890a5d-ac96-774b-bcce-b302099a8057", 1)
	out := body("01890a5d-ac96-774b-bcce-b302099a8058", 2)
	out.StudyID = "other-study"
	undecoded := errors.New("revision 3 does not decode")
	b := &PushBatch{Revisions: []*capture.Capture{in, out, nil}, Errors: []error{nil, nil, undecoded}}
	b.Restrict(func(study string) bool { return study == testStudy })
	if b.Revisions[0] != in || b.Errors[0] != nil {
		t.Errorf("in-scope revision changed: %v %v", b.Revisions[0], b.Errors[0])
	}
	if b.Revisions[1] != nil || !errors.Is(b.Errors[1], ErrOutOfScope) {
		t.Errorf("out-of-scope revision kept: %v %v", b.Revisions[1], b.Errors[1])
	}
	if b.Errors[2] != undecoded {
		t.Errorf("the decode error was replaced: %v", b.Errors[2])
	}
}

func TestPullRequestKeeps(t *testing.T) {
	for _, tc := range []struct {
		req      PullRequest
		study    string
		keep     bool
		filtered bool // whether the pull must look at each revision's study
	}{
		{PullRequest{}, "a", true, false},
		{PullRequest{Study: "a"}, "a", true, true},
		{PullRequest{Study: "a"}, "b", false, true},
		{PullRequest{Studies: []string{"a", "b"}}, "b", true, true},
		{PullRequest{Studies: []string{"a"}}, "c", false, true},
		{PullRequest{Studies: []string{}}, "a", false, true}, // an empty scope keeps nothing
		{PullRequest{Study: "a", Studies: []string{"b"}}, "a", false, true},
	} {
		if got := tc.req.keeps(tc.study); got != tc.keep {
			t.Errorf("%+v keeps %q = %v, want %v", tc.req, tc.study, got, tc.keep)
		}
		if got := tc.req.filtered(); got != tc.filtered {
			t.Errorf("%+v filtered() = %v, want %v", tc.req, got, tc.filtered)
		}
	}
}
