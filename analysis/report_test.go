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
	if r.Dispersion == nil || r.Dispersion.VarianceMean.Total > r.Animals {
		t.Errorf("dispersion missing or counting more animals than caught: %v", r.Errors)
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

// With stations and capture positions in WGS84, the report adds the
// Clark-Evans ratio over the trapped ground (a property check on the
// invented demo data: every GPS-positioned animal is one point).
func TestReportNearestNeighbourFromGPS(t *testing.T) {
	st, caps := demo.Build()
	const lat0, lon0 = 47.0, 8.0
	perDegLat := 111_000.0
	perDegLon := 111_000.0 * 0.682 // cos 47°, from memory
	pos := map[string][2]float64{}
	for i := range st.Stations {
		s := &st.Stations[i]
		la, lo := lat0+*s.GridY/perDegLat, lon0+*s.GridX/perDegLon
		s.Lat, s.Lon = &la, &lo
		pos[s.ID] = [2]float64{la, lo}
	}
	for i := range caps {
		if p, ok := pos[caps[i].StationID]; ok {
			la := p[0] + float64(i%5-2)*1e-5
			lo := p[1] + float64(i%3-1)*1e-5
			caps[i].Lat, caps[i].Lon = &la, &lo
		}
	}
	r, err := FromCaptures(st, caps)
	if err != nil {
		t.Fatal(err)
	}
	nn := r.NearestNeighbour
	if nn == nil {
		t.Fatalf("no Clark-Evans result: %v", r.Errors)
	}
	if nn.Points < 7 || nn.Points > r.Animals || !(nn.R > 0) {
		t.Errorf("Clark-Evans on %d points (animals %d), R = %v", nn.Points, r.Animals, nn.R)
	}
}
