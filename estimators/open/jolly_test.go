package open

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"testing"

	"tagtally/estimators"
)

// handArray is a five-occasion study made up for this test, with two
// animals lost on capture on occasion 2 (n2 = 60, R2 = 58).
func handArray() (MArray, []int) {
	m := MArray{
		Released: []int{50, 58, 70, 60, 55},
		M: [][]int{
			{0, 10, 5, 3, 1},
			{0, 0, 12, 6, 2},
			{0, 0, 0, 15, 5},
			{0, 0, 0, 0, 14},
			{0, 0, 0, 0, 0},
		},
	}
	return m, []int{50, 60, 70, 60, 55}
}

// TestJollySeberHand checks the estimates and SEs against the formulas of
// Seber (1982, ch. 5; from memory) and Pollock et al. (1990) worked by hand on
// handArray: each expected value below is the formula with the numbers put
// in, written out independently of the code's loops. (No published
// Jolly-Seber table could be consulted for this test; the formulas
// themselves are checked against simulation in TestJollySeberSimulation.)
func TestJollySeberHand(t *testing.T) {
	m, n := handArray()
	s, err := Summarize(m, n)
	if err != nil {
		t.Fatal(err)
	}
	// Summary by hand: m_i are column sums, r_i row sums,
	// z2 = m13+m14+m15 = 9, z3 = m14+m15+m24+m25 = 12, z4 = m15+m25+m35 = 8.
	wantM := []int{0, 10, 17, 24, 22}
	wantr := []int{19, 20, 20, 14, 0}
	wantz := []int{0, 9, 12, 8, 0}
	for i := range wantM {
		if s.Marked[i] != wantM[i] || s.Recaptured[i] != wantr[i] || s.MissedAlive[i] != wantz[i] {
			t.Fatalf("occasion %d: m=%d r=%d z=%d", i+1, s.Marked[i], s.Recaptured[i], s.MissedAlive[i])
		}
	}
	res, err := JollySeber(s)
	if err != nil {
		t.Fatal(err)
	}
	// Marked at risk, M_i = m_i + (R_i+1) z_i/(r_i+1).
	M2 := 10 + 59.0*9/21
	M3 := 17 + 71.0*12/21
	M4 := 24 + 61.0*8/15
	// N_i = (n_i+1) M_i/(m_i+1).
	N2 := 61 * M2 / 11
	N3 := 71 * M3 / 18
	N4 := 61 * M4 / 25
	// phi_i = M_{i+1}/(M_i - m_i + R_i); M_1 = 0, m_1 = 0.
	phi1 := M2 / 50
	phi2 := M3 / (M2 - 10 + 58)
	phi3 := M4 / (M3 - 17 + 70)
	// B_i = N_{i+1} - phi_i (N_i - n_i + R_i).
	B2 := N3 - phi2*(N2-60+58)
	B3 := N4 - phi3*(N3-70+70)
	// p_i = m_i/M_i.
	p3 := 17 / M3
	// var(N3 | N3) = N(N-n)[(M-m+R)/M (1/r - 1/R) + (1-m/n)/m].
	vN3 := N3 * (N3 - 70) * ((M3-17+70)/M3*(1.0/20-1.0/70) + (1-17.0/70)/17)
	// var(phi2) = phi²[(M3-m3)(M3-m3+R3)/M3² (1/r3-1/R3) + (M2-m2)/(M2-m2+R2) (1/r2-1/R2) + (1-phi)/M3].
	vPhi2 := phi2 * phi2 * ((M3-17)*(M3-17+70)/(M3*M3)*(1.0/20-1.0/70) +
		(M2-10)/(M2-10+58)*(1.0/20-1.0/58) + (1-phi2)/M3)
	// phi1: the second term vanishes (M1 = m1 = 0).
	vPhi1 := phi1 * phi1 * ((M2-10)*(M2-10+58)/(M2*M2)*(1.0/20-1.0/58) + (1-phi1)/M2)
	// var(B3 | B3), five terms with a3 = 17/70, a4 = 24/60.
	a3, a4 := 17.0/70, 24.0/60
	vB3 := B3*B3*(M4-24)*(M4-24+60)/(M4*M4)*(1.0/14-1.0/60) +
		(M3-17)/(M3-17+70)*math.Pow(phi3*70*(1-a3)/a3, 2)*(1.0/20-1.0/70) +
		(N3-70)*(N4-B3)*(1-a3)*(1-phi3)/(M3-17+70) +
		N4*(N4-60)*(1-a4)/24 +
		phi3*phi3*N3*(N3-70)*(1-a3)/17
	// var(M3) = (M-m)(M-m+R)(1/r-1/R); var(p3) = p² var(M)/M² + p(1-p)/M.
	vM3 := (M3 - 17) * (M3 - 17 + 70) * (1.0/20 - 1.0/70)
	vP3 := p3*p3*vM3/(M3*M3) + p3*(1-p3)/M3

	o := res.Occasions
	for _, c := range []struct {
		what      string
		got       *estimators.Value
		est, vari float64
	}{
		{"M3", o[2].M, M3, vM3},
		{"N2", o[1].N, N2, math.NaN()},
		{"N3", o[2].N, N3, vN3},
		{"N4", o[3].N, N4, math.NaN()},
		{"phi1", o[0].Phi, phi1, vPhi1},
		{"phi2", o[1].Phi, phi2, vPhi2},
		{"phi3", o[2].Phi, phi3, math.NaN()},
		{"B2", o[1].B, B2, math.NaN()},
		{"B3", o[2].B, B3, vB3},
		{"p3", o[2].P, p3, vP3},
	} {
		if c.got == nil {
			t.Errorf("%s missing", c.what)
			continue
		}
		if math.Abs(c.got.Estimate-c.est) > 1e-9*math.Max(1, math.Abs(c.est)) {
			t.Errorf("%s = %.6f, want %.6f", c.what, c.got.Estimate, c.est)
		}
		if !math.IsNaN(c.vari) && math.Abs(c.got.SE-math.Sqrt(c.vari)) > 1e-9*math.Sqrt(c.vari) {
			t.Errorf("SE(%s) = %.6f, want %.6f", c.what, c.got.SE, math.Sqrt(c.vari))
		}
		if c.got.SE > 0 && !(c.got.Low < c.got.Estimate && c.got.Estimate < c.got.High) {
			t.Errorf("%s interval %+v", c.what, c.got.Interval)
		}
	}
	// Which estimates exist where (Seber 1982, sec. 5.1.2): M, N, p on 2..T-1,
	// phi on 1..T-2, B on 2..T-2.
	if o[0].N != nil || o[4].N != nil || o[3].Phi != nil || o[3].B != nil || o[0].B != nil {
		t.Errorf("estimates where the method gives none: %+v", o)
	}
	if o[2].N.Low < 70 {
		t.Errorf("N3 interval below the number caught: %+v", o[2].N.Interval)
	}
}

// TestJollySeberDegenerate: zero cells are flagged with notes and never
// produce NaN (the result must encode as JSON).
func TestJollySeberDegenerate(t *testing.T) {
	s := degenerateSummary(t)
	res, err := JollySeber(s)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := json.Marshal(res); err != nil {
		t.Fatalf("result does not encode: %v", err)
	}
	if len(res.Occasions[2].Notes) == 0 || len(res.Occasions[1].Notes) == 0 || len(res.Warnings) == 0 {
		t.Errorf("degenerate cells not flagged: %+v", res.Occasions)
	}
	if res.Occasions[2].N == nil || res.Occasions[2].N.SE != 0 || res.Occasions[2].N.Kind != estimators.CINone {
		t.Errorf("r3 = 0: N3 = %+v, want an estimate without SE", res.Occasions[2].N)
	}
	if res.Occasions[1].N == nil || res.Occasions[1].N.SE != 0 {
		t.Errorf("m2 = 0: N2 = %+v, want an estimate without SE", res.Occasions[1].N)
	}
}

func TestJollySeberBadInput(t *testing.T) {
	m := MArray{Released: []int{10, 0}, M: [][]int{{0, 3}, {0, 0}}}
	s, err := Summarize(m, []int{10, 5})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := JollySeber(s); !errors.Is(err, estimators.ErrTooFewOccasions) {
		t.Errorf("two occasions: err = %v", err)
	}
	none := Summary{Caught: []int{5, 5, 5}, Marked: []int{0, 0, 0}, Released: []int{5, 5, 5}, Recaptured: []int{0, 0, 0}, MissedAlive: []int{0, 0, 0}}
	if _, err := JollySeber(none); !errors.Is(err, estimators.ErrNoRecaptures) {
		t.Errorf("no recaptures: err = %v", err)
	}
	for name, bad := range map[string]Summary{
		"empty":        {},
		"ragged":       {Caught: []int{5, 5, 5}, Marked: []int{0, 0}, Released: []int{5, 5, 5}, Recaptured: []int{1, 0, 0}, MissedAlive: []int{0, 0, 0}},
		"m above n":    {Caught: []int{5, 2, 5}, Marked: []int{0, 3, 0}, Released: []int{5, 2, 5}, Recaptured: []int{3, 0, 0}, MissedAlive: []int{0, 0, 0}},
		"r above R":    {Caught: []int{5, 5, 5}, Marked: []int{0, 3, 0}, Released: []int{2, 5, 5}, Recaptured: []int{3, 0, 0}, MissedAlive: []int{0, 0, 0}},
		"negative":     {Caught: []int{5, -5, 5}, Marked: []int{0, 0, 0}, Released: []int{5, 0, 5}, Recaptured: []int{0, 0, 0}, MissedAlive: []int{0, 0, 0}},
		"marked first": {Caught: []int{5, 5, 5}, Marked: []int{1, 0, 0}, Released: []int{5, 5, 5}, Recaptured: []int{1, 0, 0}, MissedAlive: []int{0, 0, 0}},
	} {
		if _, err := JollySeber(bad); !errors.Is(err, estimators.ErrInvalidInput) && !errors.Is(err, estimators.ErrNoData) {
			t.Errorf("%s: err = %v", name, err)
		}
	}
}

// ExampleJollySeber prints the abundance estimates of a made-up
// five-occasion study given as an m-array and catch counts.
func ExampleJollySeber() {
	m, caught := handArray()
	s, err := Summarize(m, caught)
	if err != nil {
		fmt.Println(err)
		return
	}
	res, err := JollySeber(s)
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, o := range res.Occasions {
		if o.N != nil {
			fmt.Printf("occasion %d: N = %.1f (SE %.1f, 95%% CI %.0f-%.0f)\n", o.Occasion, o.N.Estimate, o.N.SE, o.N.Low, o.N.High)
		}
	}
	// Output:
	// occasion 2: N = 195.7 (SE 65.3, 95% CI 115-392)
	// occasion 3: N = 227.1 (SE 63.5, 95% CI 143-407)
	// occasion 4: N = 137.9 (SE 35.1, 95% CI 94-241)
}

// degenerateSummary is an invented m-array with zero cells: occasion 3's
// releases are never seen again (r3 = 0), and no marked animal is caught
// on occasion 2 (m2 = 0).
func degenerateSummary(t *testing.T) Summary {
	t.Helper()
	m := MArray{
		Released: []int{20, 25, 30, 30, 0},
		M: [][]int{
			{0, 0, 4, 2, 1},
			{0, 0, 0, 5, 3},
			{0, 0, 0, 0, 0},
			{0, 0, 0, 0, 9},
			{0, 0, 0, 0, 0},
		},
	}
	s, err := Summarize(m, []int{20, 25, 34, 30, 28})
	if err != nil {
		t.Fatal(err)
	}
	return s
}
