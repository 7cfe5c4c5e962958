package closed

// Checks against published worked examples and, where no printed result
// is remembered, against hand calculations of the published formulas on
// printed data sets. Each expected number says which it is.

import (
	"encoding/csv"
	"math"
	"os"
	"strconv"
	"testing"

	"gonum.org/v1/gonum/mathext"

	"tagtally/estimators"
)

// readGerking reads testdata/gerking-sunfish.csv: Gerking's (1953) redear
// sunfish census as printed by Krebs (1999, ch. 2), from memory (see the
// README).
func readGerking(t *testing.T) Census {
	t.Helper()
	f, err := os.Open("testdata/gerking-sunfish.csv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	recs, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	var c Census
	for _, r := range recs[1:] {
		var v [3]int
		for i := range v {
			if v[i], err = strconv.Atoi(r[1+i]); err != nil {
				t.Fatalf("row %v: %v", r, err)
			}
		}
		c.Caught = append(c.Caught, v[0])
		c.Recaptured = append(c.Recaptured, v[1])
		c.NewMarks = append(c.NewMarks, v[2])
	}
	return c
}

// TestCensusGerkingSunfish: the multiple-census worked examples of Krebs
// (1999, ch. 2) on Gerking's (1953) redear sunfish, 14 daily samples.
func TestCensusGerkingSunfish(t *testing.T) {
	c := readGerking(t)
	if err := c.Validate(); err != nil {
		t.Fatal(err)
	}
	// Marked fish at large M_t as printed (Krebs 1999, ch. 2; from memory).
	wantM := []int{0, 10, 37, 54, 61, 62, 67, 71, 85, 89, 102, 112, 115, 119}
	for i, m := range c.MarkedAtLarge() {
		if m != wantM[i] {
			t.Fatalf("M_t = %v, printed %v", c.MarkedAtLarge(), wantM)
		}
	}
	s := sumCensus(c)
	// Printed totals (Krebs 1999, ch. 2; from memory): Σ C_t M_t = 10,740,
	// Σ R_t = 24. Exact integers.
	near(t, "Σ C_t M_t", s.sumCM, 10740, 0)
	near(t, "Σ R_t", s.sumR, 24, 0)

	// Schnabel's original form: 10,740/24 = 447.5 sunfish (Krebs 1999,
	// ch. 2; from memory).
	sch, err := Schnabel(c, false)
	if err != nil {
		t.Fatal(err)
	}
	near(t, "Schnabel N", sch.N.Estimate, 447.5, 1e-9)
	// Σ R_t = 24 < 50, so the limits come from the exact Poisson limits of
	// 24 (Garwood 1936), χ²(0.025; 48)/2 = 15.3773 and χ²(0.975; 50)/2 =
	// 35.7101 (scipy.stats.chi2), put through 10,740/ΣR: 300.8 to 698.4.
	// Hand calculation;
	// the limits Krebs printed for this example are not remembered
	// reliably, so they are not used here.
	if sch.N.Kind != estimators.CIPoisson {
		t.Errorf("Schnabel interval kind %q", sch.N.Kind)
	}
	near(t, "Schnabel low", sch.N.Low, 10740/35.7101, 0.01)
	near(t, "Schnabel high", sch.N.High, 10740/15.3773, 0.01)
	// Chapman's +1 form on the same totals: 10,740/25 = 429.6 (hand
	// calculation of the formula in Seber 1982, ch. 4).
	sch1, err := Schnabel(c, true)
	if err != nil {
		t.Fatal(err)
	}
	near(t, "Schnabel +1 N", sch1.N.Estimate, 429.6, 1e-9)

	// Schumacher-Eschmeyer: Σ C_t M_t² / Σ R_t M_t = 970,296/2,294 =
	// 422.97 (hand calculation on the printed table; Krebs 1999, ch. 2,
	// prints N ≈ 423, from memory).
	se, err := SchumacherEschmeyer(c)
	if err != nil {
		t.Fatal(err)
	}
	near(t, "Σ C_t M_t²", s.sumCM2, 970296, 0)
	near(t, "Σ R_t M_t", s.sumRM, 2294, 0)
	near(t, "Schumacher-Eschmeyer N", se.N.Estimate, 970296.0/2294, 1e-9)
	near(t, "Schumacher-Eschmeyer N, printed", se.N.Estimate, 423, 0.5)
	// Krebs (1999, ch. 2) prints 95% limits of about 300 and 719 sunfish
	// (from memory; the printed limits are whole fish and the digits are
	// not certain, hence ±1.5). They need t with s - 2 = 12 degrees of
	// freedom, s = 14 samples: with 11 the limits would be 294.9 and
	// 747.5, outside the tolerance.
	near(t, "Schumacher-Eschmeyer low, printed", se.N.Low, 300, 1.5)
	near(t, "Schumacher-Eschmeyer high, printed", se.N.High, 719, 1.5)
	// Hand calculation of the same limits (Seber 1982, ch. 4): residual
	// mean square [Σ R²/C − (Σ RM)²/Σ CM²]/12, SE(1/N) = sqrt(that/Σ CM²),
	// 1/N ± t(0.975; 12)·SE with t(0.975; 12) = 2.178813.
	sumR2C := 0.0
	for i := range c.Caught {
		sumR2C += float64(c.Recaptured[i]*c.Recaptured[i]) / float64(c.Caught[i])
	}
	seInv := math.Sqrt((sumR2C - 2294.0*2294/970296) / 12 / 970296)
	b := 2294.0 / 970296
	near(t, "Schumacher-Eschmeyer low, hand", se.N.Low, 1/(b+2.178813*seInv), 0.01)
	near(t, "Schumacher-Eschmeyer high, hand", se.N.High, 1/(b-2.178813*seInv), 0.02)
	near(t, "SE(1/N)", se.Parameters[0].SE, seInv, 1e-12)
}

// krebsSunfish are the two-sample counts of Krebs's (1999, ch. 2) green
// sunfish example (from memory): 109 marked, 177 in the second sample, 57
// of them marked.
var krebsSunfish = TwoSample{M: 109, C: 177, R: 57}

// TestTwoSampleKrebsSunfish checks the two-sample estimators on the printed
// counts of Krebs's green sunfish example.
func TestTwoSampleKrebsSunfish(t *testing.T) {
	s := krebsSunfish
	ch, err := Chapman(s, TwoSampleCIAuto)
	if err != nil {
		t.Fatal(err)
	}
	// Chapman: 110·178/58 − 1 = 336.6 sunfish (Krebs 1999, ch. 2, from
	// memory; printed to one decimal).
	near(t, "Chapman N, printed", ch.N.Estimate, 336.6, 0.05)
	// Seber's (1970; 1982, ch. 3) variance on the same counts, by hand:
	// 110·178·52·120/(58²·59) = 615.58, SE 24.81. (Whether Krebs prints it
	// for this example is not remembered.)
	near(t, "Chapman variance, hand", ch.N.SE*ch.N.SE, 110.0*178*52*120/(58*58*59), 1e-6)
	near(t, "Chapman SE, hand", ch.N.SE, 24.811, 0.001)
	// 57/177 = 0.32 of the second sample was marked, above one tenth, so
	// the binomial interval applies (the rule of thumb in Krebs 1999,
	// ch. 2, from memory).
	if ch.N.Kind != estimators.CIBinomial {
		t.Errorf("Chapman interval kind %q, want binomial", ch.N.Kind)
	}
	lp, err := LincolnPetersen(s, TwoSampleCINormal)
	if err != nil {
		t.Fatal(err)
	}
	// Petersen: 109·177/57 = 338.47 and var = 109²·177·120/57³ (Seber
	// 1982, ch. 3), by hand on the printed counts.
	near(t, "Petersen N, hand", lp.N.Estimate, 338.4737, 1e-4)
	near(t, "Petersen variance, hand", lp.N.SE*lp.N.SE, 109.0*109*177*120/(57.0*57*57), 1e-6)
	ba, err := Bailey(s, TwoSampleCINormal)
	if err != nil {
		t.Fatal(err)
	}
	// Bailey (1951, 1952): 109·178/58 = 334.52, var = 109²·178·120/(58²·59),
	// by hand on the printed counts (no printed Bailey example is
	// remembered).
	near(t, "Bailey N, hand", ba.N.Estimate, 334.5172, 1e-4)
	near(t, "Bailey variance, hand", ba.N.SE*ba.N.SE, 109.0*109*178*120/(58*58*59), 1e-6)
}

// krebsSunfishHistories turns the two-sample counts into capture histories
// over two occasions: 57 caught twice, 52 only first, 120 only second.
func krebsSunfishHistories() *estimators.Histories {
	h := &estimators.Histories{}
	add := func(n int, a, b bool) {
		for i := 0; i < n; i++ {
			h.Caught = append(h.Caught, []bool{a, b})
		}
	}
	add(57, true, true)
	add(52, true, false)
	add(120, false, true)
	return h
}

// TestTwoOccasionLikelihoodsArePetersen: with two occasions Darroch's
// (1958) equation for Mt, 1 − Mt1/N = (1 − n_1/N)(1 − n_2/N), has the
// Petersen estimate n_1 n_2/m_2 = M·C/R as its root (algebra), and
// Huggins' (1989) conditional model with occasion effects is saturated
// (three observed histories, two probabilities), so its Horvitz-Thompson N
// is M·C/R exactly. On Krebs's sunfish counts M·C/R = 338.47 (by hand).
//
// Darroch's equation comes from the likelihood with ln N! replaced by
// N ln N − N; the exact likelihood (lnΓ, as fitted here, see
// TestExactEstimatingEquations) has its maximum where ψ(N+1) − ψ(N−Mt1+1)
// replaces ln(N/(N−Mt1)). On these counts that moves the root by about two
// animals (the profile is flat: d/dN of the equation is −0.0015 at 338.5
// while the two log terms differ by 0.0031), so Mt is held to 338.47 within
// 2.5, and its exact whole-number maximum must lie next to its continuous
// one.
func TestTwoOccasionLikelihoodsArePetersen(t *testing.T) {
	h := krebsSunfishHistories()
	petersen := 109.0 * 177 / 57
	mt, err := Mt(h)
	if err != nil {
		t.Fatal(err)
	}
	near(t, "Mt N against Darroch's root", mt.N.Estimate, petersen, 2.5)
	checkWholeNumberMaximum(t, "Mt", h, mt.N.Estimate)
	hu, err := Huggins(h, nil, true)
	if err != nil {
		t.Fatal(err)
	}
	near(t, "Huggins p(t) N", hu.N.Estimate, petersen, 1e-3)
	// Saturated: p_1 = m_2/n_2 = 57/177 and p_2 = m_2/n_1 = 57/109.
	occ2, ok := hu.Param("occasion 2 effect (logit scale, relative to occasion 1)")
	if !ok {
		t.Fatalf("parameters %+v", hu.Parameters)
	}
	near(t, "Huggins p(t) occasion 2 effect", occ2.Estimate, estimators.Logit(57.0/109)-estimators.Logit(57.0/177), 1e-4)
}

// TestHugginsConstantCottontail: Huggins' (1989) conditional likelihood
// with one capture probability, by hand on the cottontail frequencies
// (Edwards & Eberhardt 1967; frequencies from memory, see the README).
// Conditional on capture, an animal caught k of t times has likelihood
// p^k (1−p)^(t−k) / (1 − (1−p)^t), so p̂ solves
//
//	n./(Mt1·t) = p / (1 − (1−p)^t)
//
// and N̂ = Mt1/(1 − (1−p̂)^t) (Huggins 1989). Its variance is Huggins'
// Σ(1−π)/π² + (∂N/∂p)² var(p̂), with var(p̂) the inverse of the observed
// information of this one-parameter likelihood, here by a central second
// difference of the closed form written out below. No printed Huggins
// result is remembered, so this is a hand calculation of the published
// formulas on printed data (weaker than a printed result).
func TestHugginsConstantCottontail(t *testing.T) {
	f := cottontail(t)
	h := readCottontail(t)
	tf, r, caps := float64(len(f)), 0.0, 0.0
	for k, fk := range f {
		r += float64(fk)
		caps += float64((k + 1) * fk)
	}
	ll := func(p float64) float64 {
		return caps*math.Log(p) + (r*tf-caps)*math.Log(1-p) - r*math.Log(1-math.Pow(1-p, tf))
	}
	lo, hi := 1e-6, 1-1e-6
	g := func(p float64) float64 { return p/(1-math.Pow(1-p, tf)) - caps/(r*tf) }
	for i := 0; i < 200; i++ {
		if mid := (lo + hi) / 2; g(mid) < 0 {
			lo = mid
		} else {
			hi = mid
		}
	}
	p := (lo + hi) / 2
	pi := 1 - math.Pow(1-p, tf)
	nHat := r / pi
	const d = 1e-5
	info := -(ll(p+d) - 2*ll(p) + ll(p-d)) / (d * d)
	dNdp := -r * tf * math.Pow(1-p, tf-1) / (pi * pi)
	seN := math.Sqrt(r*(1-pi)/(pi*pi) + dNdp*dNdp/info)

	res, err := Huggins(h, nil, false)
	if err != nil {
		t.Fatal(err)
	}
	near(t, "Huggins p(.) N", res.N.Estimate, nHat, 1e-4*nHat)
	near(t, "Huggins p(.) SE(N)", res.N.SE, seN, 0.01*seN)
	near(t, "Huggins p(.) lnL", res.LogLik, ll(p), 1e-6)
	t.Logf("cottontail Huggins p(.): p̂ = %.5f, N̂ = %.3f, SE %.3f", p, nHat, seN)
}

// TestExactEstimatingEquations: with N continuous, the maximum-likelihood
// estimates of M0, Mt and Mb (Otis et al. 1978; Darroch 1958) solve
// one-dimensional equations once the capture probabilities are profiled
// out in closed form:
//
//	M0: p = n./(tN),            ψ(N+1) − ψ(N−Mt1+1) + t ln(1−p) = 0
//	Mt: p_j = n_j/N,            ψ(N+1) − ψ(N−Mt1+1) + Σ_j ln(1−p_j) = 0
//	Mb: p = Mt1/Σ_j (N − M_j),  ψ(N+1) − ψ(N−Mt1+1) + t ln(1−p) = 0,
//	    c = m./Σ_j M_j
//
// (M_j: animals caught before occasion j; m.: all recaptures). The roots
// are found by bisection here, with no optimiser, and must match the fits
// to the optimiser's precision. Data: the cottontail frequencies (printed,
// from memory) for M0, Krebs's sunfish counts (printed, from memory) and
// the invented histories for Mt, the invented histories for Mb (no printed
// data set with first-capture counts is remembered). These are hand
// calculations of published equations, not printed results.
func TestExactEstimatingEquations(t *testing.T) {
	psi := mathext.Digamma
	nTermD := func(n, mt1 float64) float64 { return psi(n+1) - psi(n-mt1+1) }
	counts := func(h *estimators.Histories) (nj, before []float64, caps, recaps float64) {
		nj, before = make([]float64, h.Occasions()), make([]float64, h.Occasions())
		seen := make([]bool, len(h.Caught))
		for j := range nj {
			for i, row := range h.Caught {
				if seen[i] {
					before[j]++
				}
				if row[j] {
					nj[j]++
					caps++
					if seen[i] {
						recaps++
					}
				}
			}
			for i, row := range h.Caught {
				seen[i] = seen[i] || row[j]
			}
		}
		return nj, before, caps, recaps
	}
	check := func(name string, h *estimators.Histories, fit func(*estimators.Histories) (*estimators.Result, error), eq func(n float64) float64) *estimators.Result {
		t.Helper()
		res, err := fit(h)
		if err != nil {
			t.Fatal(err)
		}
		root := bisectN(t, float64(h.Animals()), eq)
		// The optimiser stops at a relative gradient of about 1e-8 on the
		// working scale; 1e-4 of N is far above that and far below any
		// difference that matters.
		near(t, name+" N against its estimating equation", res.N.Estimate, root, 1e-4*root)
		return res
	}

	h := readCottontail(t)
	_, _, caps, _ := counts(h)
	tf, mt1 := float64(h.Occasions()), float64(h.Animals())
	check("M0 cottontail", h, M0, func(n float64) float64 { return nTermD(n, mt1) + tf*math.Log(1-caps/(tf*n)) })

	for name, h := range map[string]*estimators.Histories{"Krebs sunfish": krebsSunfishHistories(), "invented": readLikelihoodHistories(t, false)} {
		nj, _, _, _ := counts(h)
		mt1 := float64(h.Animals())
		check("Mt "+name, h, Mt, func(n float64) float64 {
			s := nTermD(n, mt1)
			for _, v := range nj {
				s += math.Log(1 - v/n)
			}
			return s
		})
	}

	h = readLikelihoodHistories(t, false)
	_, before, _, recaps := counts(h)
	tf, mt1 = float64(h.Occasions()), float64(h.Animals())
	sumBefore := 0.0
	for _, v := range before {
		sumBefore += v
	}
	pOf := func(n float64) float64 { return mt1 / (tf*n - sumBefore) }
	res := check("Mb invented", h, Mb, func(n float64) float64 { return nTermD(n, mt1) + tf*math.Log(1-pOf(n)) })
	pr, ok1 := res.Param("p")
	cr, ok2 := res.Param("c")
	if !ok1 || !ok2 {
		t.Fatalf("Mb parameters %+v", res.Parameters)
	}
	near(t, "Mb p", pr.Estimate, pOf(res.N.Estimate), 1e-6)
	near(t, "Mb c = m./Σ M_j", cr.Estimate, recaps/sumBefore, 1e-6)
}
