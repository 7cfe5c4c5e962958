package analysis

import (
	"testing"

	"tagtally/capture"
	"tagtally/demo"
)

// The demo study is invented data; these checks are properties any
// report must have (common practice), not reference values.
func TestReportOnDemoStudy(t *testing.T) {
	st, caps := demo.Build()
	r, err := FromCaptures(st, caps)
	if err != nil {
		t.Fatal(err)
	}
	if r.Closed == nil || r.Closed.AveragedN == nil {
		t.Fatalf("closed design without a model table: %v", r.Errors)
	}
	if r.Closed.AveragedN.Estimate < float64(r.Animals) || r.Closed.AveragedN.Low < float64(r.Animals) {
		t.Errorf("model-averaged N %.1f (CI low %.1f) below the %d animals caught", r.Closed.AveragedN.Estimate, r.Closed.AveragedN.Low, r.Animals)
	}
	if r.Density == nil {
		t.Errorf("grid study without density: %v", r.Errors)
	} else if !(r.Density.Density.Estimate > 0) {
		t.Errorf("density %v", r.Density.Density)
	}
	if r.SexRatio == nil || r.Ages == nil || r.Frequencies == nil || r.Mass == nil {
		t.Errorf("demography missing: %v", r.Errors)
	}
	if len(r.Summary) != len(st.Occasions) || r.MArray == nil {
		t.Errorf("summary %d rows for %d occasions", len(r.Summary), len(st.Occasions))
	}
	total := 0
	for _, f := range r.Frequencies.F {
		total += f
	}
	if total != r.Animals {
		t.Errorf("capture frequencies sum to %d, animals %d", total, r.Animals)
	}
}

func TestReportOpenDesign(t *testing.T) {
	st, caps := demo.Build()
	st.Design = capture.DesignOpen
	r, err := FromCaptures(st, caps)
	if err != nil {
		t.Fatal(err)
	}
	if r.JollySeber == nil || r.CJS == nil || r.GOF == nil {
		t.Fatalf("open design sections missing: %v", r.Errors)
	}
	if r.Closed != nil {
		t.Error("open design should not run the closed table")
	}
}

func TestReportWithNoCaptures(t *testing.T) {
	st, _ := demo.Build()
	r, err := FromCaptures(st, nil)
	if err != nil {
		t.Fatal(err)
	}
	if r.Errors["estimates"] == "" || r.Closed != nil {
		t.Errorf("a study with no captures must say why there are no estimates: %+v", r.Errors)
	}
}
