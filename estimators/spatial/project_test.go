package spatial

import (
	"encoding/csv"
	"errors"
	"math"
	"os"
	"strconv"
	"testing"

	"tagtally/estimators"
)

// TestProjectionScaleAtCentre checks the metres per degree at the centre
// against the standard table values for the WGS84 ellipsoid.
func TestProjectionScaleAtCentre(t *testing.T) {
	tests := []struct {
		lat        float64
		mPerDegLat float64
		mPerDegLon float64
		tolerance  float64
	}{
		// Length of one degree on WGS84 at the equator: 110 574 m of
		// latitude, 111 320 m of longitude (from memory, standard tables).
		{0, 110574, 111320, 2},
		// At 45°: 111 132 m of latitude, 78 847 m of longitude (from
		// memory, standard tables).
		{45, 111132, 78847, 2},
	}
	for _, tc := range tests {
		lp, err := NewLocalProjection(LatLon{tc.lat, 20})
		if err != nil {
			t.Fatal(err)
		}
		// A thousandth of a degree, scaled up: the local scale at the centre.
		pn := lp.Project(LatLon{tc.lat + 1e-3, 20})
		pe := lp.Project(LatLon{tc.lat, 20 + 1e-3})
		if got := pn.Y * 1000; math.Abs(got-tc.mPerDegLat) > tc.tolerance {
			t.Errorf("lat %v: %v m per degree of latitude, want %v", tc.lat, got, tc.mPerDegLat)
		}
		if got := pe.X * 1000; math.Abs(got-tc.mPerDegLon) > tc.tolerance {
			t.Errorf("lat %v: %v m per degree of longitude, want %v", tc.lat, got, tc.mPerDegLon)
		}
	}
}

// TestProjectionAgainstGeodesics compares projected distances with
// geodesic distances on the WGS84 ellipsoid computed by pyproj
// (testdata/geodesic.py, output committed in testdata/geodesic.csv), and
// checks the error bound stated on LocalProjection: a relative error of
// about |tan lat0|·d/6371 km for points within d of the centre.
func TestProjectionAgainstGeodesics(t *testing.T) {
	f, err := os.Open("testdata/geodesic.csv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	num := func(s string) float64 {
		v, err := strconv.ParseFloat(s, 64)
		if err != nil {
			t.Fatal(err)
		}
		return v
	}
	for _, r := range rows[1:] {
		c := LatLon{num(r[0]), num(r[1])}
		a, b := LatLon{num(r[2]), num(r[3])}, LatLon{num(r[4]), num(r[5])}
		want := num(r[6])
		lp, err := NewLocalProjection(c)
		if err != nil {
			t.Fatal(err)
		}
		pa, pb := lp.Project(a), lp.Project(b)
		got := Dist(pa, pb)
		reach := math.Max(math.Hypot(pa.X, pa.Y), math.Hypot(pb.X, pb.Y))
		// Bound: the stated |tan lat0|·d/R plus 2e-5 for the second-order
		// terms the statement rounds away (meridian convergence, change of
		// the radii with latitude).
		rel := math.Abs(math.Tan(c.Lat*math.Pi/180))*reach/6371000 + 2e-5
		if math.Abs(got-want) > rel*want+0.01 {
			t.Errorf("centre %v: %v to %v: projected %.3f m, geodesic %.3f m (allowed ±%.3f)",
				c, a, b, got, want, rel*want+0.01)
		}
	}
}

func TestProjectStations(t *testing.T) {
	// Four stations around 179.9995°E/W: the centroid longitude must come
	// out on the 180° meridian, not near 0°.
	pts, lp, err := ProjectStations([]LatLon{{-17, 179.9995}, {-17, -179.9995}, {-17.001, 179.9995}, {-17.001, -179.9995}})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(math.Abs(lp.Centre.Lon)-180) > 1e-9 {
		t.Errorf("centre longitude %v, want ±180", lp.Centre.Lon)
	}
	// 0.001° of longitude at 17°S is about 106 m; every point within 110 m.
	for _, p := range pts {
		if math.Hypot(p.X, p.Y) > 110 {
			t.Errorf("point %v too far from the centre", p)
		}
	}
	if _, _, err := ProjectStations(nil); !errors.Is(err, estimators.ErrNoData) {
		t.Errorf("no positions: err = %v", err)
	}
	if _, _, err := ProjectStations([]LatLon{{91, 0}}); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("latitude 91: err = %v", err)
	}
	if _, _, err := ProjectStations([]LatLon{{10, 0}, {10, 2}}); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("stations 200 km apart: err = %v", err)
	}
	if _, err := NewLocalProjection(LatLon{89, 0}); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("centre near the pole: err = %v", err)
	}
}
