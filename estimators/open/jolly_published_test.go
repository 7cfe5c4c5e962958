package open

import (
	"encoding/csv"
	"fmt"
	"math"
	"os"
	"strconv"
	"testing"

	"tagtally/estimators"
)

// readJollySummary reads testdata/jolly1965-capsid.csv (columns occasion,
// n, m, R, r, z).
func readJollySummary(t *testing.T) Summary {
	t.Helper()
	f, err := os.Open("testdata/jolly1965-capsid.csv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	var s Summary
	for _, row := range rows[1:] {
		v := make([]int, 5)
		for k := range v {
			if v[k], err = strconv.Atoi(row[k+1]); err != nil {
				t.Fatal(err)
			}
		}
		s.Caught = append(s.Caught, v[0])
		s.Marked = append(s.Marked, v[1])
		s.Released = append(s.Released, v[2])
		s.Recaptured = append(s.Recaptured, v[3])
		s.MissedAlive = append(s.MissedAlive, v[4])
	}
	return s
}

// TestJollySeberJolly1965 checks the original (unadjusted) moment
// estimates against Jolly's own worked example: his 13-sample capsid data
// (testdata/jolly1965-capsid.csv) and the estimates he printed, Jolly
// (1965, Biometrika 52:225-247, the table of results of his example;
// reproduced, as far as we recall, in Seber 1982, ch. 5).
//
// Every expected value below is FROM MEMORY. The inputs are recalled
// surely (they satisfy z_{i+1} = z_i + r_i - m_{i+1} on all 12 occasions
// and close at z_13 = 0), but several recalled printed estimates differ
// from a recomputation on those inputs in the first decimal (e.g. N_2
// recalled 511.2, recomputed 511.4; M_3 recalled 170.2, recomputed
// 170.5; N_12 recalled 462.0, recomputed 462.9), which is a failure of
// recall, not of the data. The tolerances are therefore 0.3% for M and N,
// 0.5 animals for B and 0.0015 for phi: wide enough for that recall,
// still about thirty times narrower than the gap to the bias-adjusted
// estimates (N_2 = 466 instead of 511), which the test also checks, so it
// tells the two forms apart.
func TestJollySeberJolly1965(t *testing.T) {
	s := readJollySummary(t)
	// The cross-check of the recalled inputs (Seber 1982, ch. 5: z_{i+1}
	// = z_i + r_i - m_{i+1}, every marked animal known alive is either
	// caught at i+1 or still missed).
	for i := 0; i+1 < len(s.Caught); i++ {
		if s.MissedAlive[i+1] != s.MissedAlive[i]+s.Recaptured[i]-s.Marked[i+1] {
			t.Fatalf("testdata: z is inconsistent at occasion %d", i+2)
		}
	}
	res, err := JollySeberUnadjusted(s)
	if err != nil {
		t.Fatal(err)
	}
	// Jolly (1965), printed estimates for occasions 2..12 (from memory).
	printedM := []float64{35.0, 170.2, 258.1, 227.8, 324.8, 359.5, 319.2, 402.2, 316.5, 317.2, 277.7}
	printedN := []float64{511.2, 779.1, 963.0, 945.3, 882.2, 802.5, 653.6, 628.8, 478.5, 506.4, 462.0}
	// phi_1..phi_11 (from memory; phi_2 > 1 is printed as such).
	printedPhi := []float64{0.649, 1.015, 0.867, 0.564, 0.836, 0.790, 0.651, 0.985, 0.686, 0.884, 0.771}
	// B_2..B_11 (from memory; B_8 is printed negative).
	printedB := []float64{263.2, 291.8, 406.4, 96.9, 107.0, 135.7, -13.8, 49.0, 84.1, 74.5}
	o := res.Occasions
	for k, want := range printedM {
		i := k + 1
		if o[i].M == nil || math.Abs(o[i].M.Estimate-want) > 0.003*want {
			t.Errorf("M_%d = %v, Jolly (1965) printed %.1f (from memory)", i+1, o[i].M, want)
		}
	}
	for k, want := range printedN {
		i := k + 1
		if o[i].N == nil || math.Abs(o[i].N.Estimate-want) > 0.003*want {
			t.Errorf("N_%d = %v, Jolly (1965) printed %.1f (from memory)", i+1, o[i].N, want)
			continue
		}
		if !(o[i].N.SE > 0) {
			t.Errorf("N_%d has no SE", i+1)
		}
	}
	for i, want := range printedPhi {
		if o[i].Phi == nil || math.Abs(o[i].Phi.Estimate-want) > 0.0015 {
			t.Errorf("phi_%d = %v, Jolly (1965) printed %.3f (from memory)", i+1, o[i].Phi, want)
		}
	}
	for k, want := range printedB {
		i := k + 1
		if o[i].B == nil || math.Abs(o[i].B.Estimate-want) > 0.5 {
			t.Errorf("B_%d = %v, Jolly (1965) printed %.1f (from memory)", i+1, o[i].B, want)
		}
	}
	// The moment estimates leave the parameter space on this data set
	// (phi_2 > 1, B_8 < 0); both must be reported with a note, not hidden.
	if len(o[1].Notes) == 0 || len(o[7].Notes) == 0 {
		t.Errorf("phi_2 > 1 or B_8 < 0 not noted: %q, %q", o[1].Notes, o[7].Notes)
	}
	// Where the method gives no estimate (Seber 1982, sec. 5.1.2).
	if o[0].N != nil || o[12].N != nil || o[11].Phi != nil || o[11].B != nil || o[0].B != nil {
		t.Error("estimates on occasions where the method gives none")
	}

	// The bias-adjusted form on the same data is clearly different where
	// m_i is small: M_2 = 10 + 144·14/81, N_2 = 147 M_2/11 (the formulas of
	// JollySeber, by hand).
	adj, err := JollySeber(s)
	if err != nil {
		t.Fatal(err)
	}
	M2 := 10 + 144.0*14/81
	if n2 := adj.Occasions[1].N.Estimate; math.Abs(n2-147*M2/11) > 1e-9 || math.Abs(n2-printedN[0]) < 30 {
		t.Errorf("bias-adjusted N_2 = %.2f, want %.2f", n2, 147*M2/11)
	}
}

// TestJollySeberUnadjustedDegenerate: without the +1 adjustment, r_i = 0
// with z_i > 0 and m_i = 0 leave estimates undefined; they must be noted
// and absent, never NaN or Inf.
func TestJollySeberUnadjustedDegenerate(t *testing.T) {
	s := degenerateSummary(t)
	res, err := JollySeberUnadjusted(s)
	if err != nil {
		t.Fatal(err)
	}
	o := res.Occasions
	// Occasion 2: m_2 = 0, so N_2 = n_2 M_2/0 is undefined.
	if o[1].M == nil || o[1].N != nil || len(o[1].Notes) == 0 {
		t.Errorf("m_2 = 0: M %v N %v notes %q", o[1].M, o[1].N, o[1].Notes)
	}
	// Occasion 3: r_3 = 0 with z_3 = 3 > 0, so M_3 = m_3 + R_3 z_3/0 is
	// undefined, and with it N_3, p_3, phi_2 and phi_3.
	if o[2].M != nil || o[2].N != nil || o[1].Phi != nil || o[2].Phi != nil || len(o[2].Notes) == 0 {
		t.Errorf("r_3 = 0: occasion 3 %+v", o[2])
	}
	for i, oc := range o {
		for name, v := range map[string]*estimators.Value{"M": oc.M, "N": oc.N, "phi": oc.Phi, "B": oc.B, "p": oc.P} {
			if v == nil {
				continue
			}
			for _, x := range []float64{v.Estimate, v.SE, v.Low, v.High} {
				if math.IsNaN(x) || math.IsInf(x, 0) {
					t.Errorf("occasion %d: %s = %+v", i+1, name, v)
				}
			}
		}
	}
}

// TestJollySeberUnadjustedIsCJSTime: Jolly's original estimates of phi_i
// and p_i are the maximum-likelihood estimates of the CJS model phi(t)
// p(t) (Seber 1982, ch. 5; Pollock et al. 1990; from memory), so on the
// dipper m-array (Lebreton et al. 1992, from memory) JollySeberUnadjusted
// and CJS must agree to the optimiser's precision, and both must give the
// published phi(t) p(t) survivals checked in TestCJSDipperTimePublished.
// There are no losses on capture in these data, so n_i = R_i; n_7 is not
// in the m-array and is set to the marked animals caught on occasion 7 (it
// enters no estimate compared here).
func TestJollySeberUnadjustedIsCJSTime(t *testing.T) {
	m := dipper(t)
	T := m.Occasions()
	caught := append([]int(nil), m.Released...)
	for i := 0; i < T-1; i++ {
		caught[T-1] += m.M[i][T-1]
	}
	s, err := Summarize(m, caught)
	if err != nil {
		t.Fatal(err)
	}
	js, err := JollySeberUnadjusted(s)
	if err != nil {
		t.Fatal(err)
	}
	cjs, err := CJS(m, Time, Time)
	if err != nil {
		t.Fatal(err)
	}
	// Lebreton et al. (1992), phi(t) p(t) survivals, from memory (as in
	// TestCJSDipperTimePublished).
	published := []float64{0.718, 0.435, 0.478, 0.626, 0.599}
	for i := 0; i < T-2; i++ {
		got := js.Occasions[i].Phi
		want := param(t, cjs, fmt.Sprintf("phi[%d]", i+1))
		if got == nil || math.Abs(got.Estimate-want.Estimate) > 2e-5 {
			t.Errorf("phi_%d: Jolly %v, CJS phi(t) p(t) %.5f", i+1, got, want.Estimate)
			continue
		}
		if i < len(published) && math.Abs(got.Estimate-published[i]) > 0.0006 {
			t.Errorf("phi_%d = %.4f, Lebreton et al. (1992) %.3f (from memory)", i+1, got.Estimate, published[i])
		}
	}
	for i := 1; i < T-1; i++ {
		got := js.Occasions[i].P
		want := param(t, cjs, fmt.Sprintf("p[%d]", i+1))
		if got == nil || math.Abs(got.Estimate-want.Estimate) > 2e-5 {
			t.Errorf("p_%d: Jolly %v, CJS phi(t) p(t) %.5f", i+1, got, want.Estimate)
		}
	}
}
