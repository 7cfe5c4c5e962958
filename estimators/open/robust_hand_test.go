package open

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestRobustAdHocByHand works Pollock's (1982) ad hoc robust design by
// hand on a small seeded simulation of 3 primaries of 3 secondaries, with
// losses on capture, and compares every stage with RobustDesignAdHoc.
//
// This is a WEAKER check than a published worked example: we could not
// recall the numbers of any printed robust-design example (Pollock 1982;
// Pollock et al. 1990; Kendall & Nichols 1995; Kendall et al. 1997), so
// the expected values are the published formulas applied by hand, in the
// test's own code, to data simulated for the test. The joint likelihood
// (RobustDesignML) is checked against scipy in TestRobustMLAgainstScipy
// and at its maximum in TestRobustMLAtMaximum.
//
// By hand:
//
//   - Within primary i, model M0 (Otis et al. 1978): with Mt1 distinct
//     animals, n. captures and T. the secondaries at which the caught
//     animals were available (3·Mt1 less the secondaries after a loss),
//     lnL(N) = lnΓ(N+1) − lnΓ(N−Mt1+1) + n. ln p + (T. − n. + 3(N−Mt1)) ln(1−p)
//     at p = n./(T. + 3(N−Mt1)), maximised over N by golden section here;
//     p*_i = Mt1_i / N_i.
//   - Between primaries, CJS phi(t) p(t) on the primary-level histories.
//     With three primaries it is saturated, and its maximum-likelihood
//     estimates are Jolly's moment estimates (Seber 1982, ch. 5; worked
//     out here from the three cell probabilities of the m-array):
//     M_2 = m_2 + R_2 z_2/r_2, phi_1 = M_2/R_1, p_2 = m_2/M_2, and only the
//     product phi_2 p_3 = r_2/R_2 is estimable.
//   - Pollock (1982): phi_2 = (phi_2 p_3)/p*_3; B_i = N_{i+1} − phi_i (N_i −
//     L_i) with L_i lost on capture in primary i; and the ad hoc temporary
//     emigration of Kendall et al. (1997), gamma_2 = 1 − p_2/p*_2.
func TestRobustAdHocByHand(t *testing.T) {
	rng := rand.New(rand.NewPCG(1982, 752))
	h, primary, _, _ := robustSimulate(rng, robustSim{primaries: 3, secondaries: 3, initial: 300, births: 120, phi: 0.7, p: 0.4, gamma: 0.2, loss: 0.03})
	const s = 3
	// Per primary: distinct caught, captures, available secondaries, lost.
	var mt1, caps, avail, lost [3]float64
	// Primary-level summary for the CJS stage (0-based primaries).
	var R1, m2, R2, r2, z2 float64
	for a, row := range h.Caught {
		var in [3]bool
		last := -1 // occasion of the last capture
		for j, c := range row {
			if c {
				in[primary[j]] = true
				last = j
			}
		}
		lostHere := -1 // primary of the loss on capture
		if h.Removed[a] {
			lostHere = primary[last]
		}
		for i := 0; i < 3; i++ {
			if !in[i] {
				continue
			}
			mt1[i]++
			for q := 0; q < s; q++ {
				if row[i*s+q] {
					caps[i]++
				}
			}
			if lostHere == i {
				lost[i]++
				avail[i] += float64(last-i*s) + 1
			} else {
				avail[i] += s
			}
		}
		rel := func(i int) bool { return in[i] && lostHere != i }
		if rel(0) {
			R1++
		}
		if in[1] && in[0] {
			m2++
		}
		if rel(1) {
			R2++
			if in[2] {
				r2++
			}
		}
		if rel(0) && !in[1] && in[2] {
			z2++
		}
	}
	if lost[0]+lost[1] == 0 || z2 == 0 {
		t.Fatalf("the seed should give losses and missed animals: lost %v, z2 %v", lost, z2)
	}
	var N, pstar [3]float64
	for i := 0; i < 3; i++ {
		M, n, T := mt1[i], caps[i], avail[i]
		ll := func(N float64) float64 {
			f0 := N - M
			p := n / (T + s*f0)
			a, _ := math.Lgamma(N + 1)
			b, _ := math.Lgamma(f0 + 1)
			return a - b + n*math.Log(p) + (T-n+s*f0)*math.Log(1-p)
		}
		lo, hi := M, 20*M
		for k := 0; k < 200; k++ { // golden section
			a := hi - (hi-lo)*0.6180339887498949
			b := lo + (hi-lo)*0.6180339887498949
			if ll(a) < ll(b) {
				lo = a
			} else {
				hi = b
			}
		}
		N[i] = (lo + hi) / 2
		pstar[i] = M / N[i]
	}
	M2 := m2 + R2*z2/r2
	phi1 := M2 / R1
	p2 := m2 / M2
	prod := r2 / R2
	phi2 := prod / pstar[2]
	B1 := N[1] - phi1*(N[0]-lost[0])
	B2 := N[2] - phi2*(N[1]-lost[1])
	gamma2 := 1 - p2/pstar[1]

	res, err := RobustDesignAdHoc(h, primary)
	if err != nil {
		t.Fatal(err)
	}
	rel := func(what string, got, want, tol float64) {
		t.Helper()
		if math.Abs(got-want) > tol*math.Max(1, math.Abs(want)) {
			t.Errorf("%s = %.6f, by hand %.6f", what, got, want)
		}
	}
	for i, rp := range res.Primaries {
		if rp.Chosen == nil || rp.Chosen.Method == "" || rp.N == nil {
			t.Fatalf("primary %d: no closed estimate: %v", i+1, rp.Notes)
		}
		if rp.Models.Rows[0].Result.Method != rp.Chosen.Method || rp.Chosen.Method[:2] != "M0" {
			// With 3 secondaries Mh is not fitted (it needs 4), so M0 must
			// be the one used; a change there would invalidate the hand
			// values below.
			t.Fatalf("primary %d: closed model %s", i+1, rp.Chosen.Method)
		}
		rel("N", rp.N.Estimate, N[i], 1e-5)
		rel("p*", rp.PStar.Estimate, pstar[i], 1e-5)
		if rp.Caught != int(mt1[i]) {
			t.Errorf("primary %d: %d caught, by hand %v", i+1, rp.Caught, mt1[i])
		}
	}
	p := res.Primaries
	rel("phi_1", p[0].Phi.Estimate, phi1, 1e-4)
	rel("phi_2 (ad hoc, last interval)", p[1].Phi.Estimate, phi2, 1e-4)
	rel("B_1", p[0].B.Estimate, B1, 1e-4)
	rel("B_2", p[1].B.Estimate, B2, 1e-4)
	if p[1].TemporaryEmigration == nil {
		t.Fatal("no temporary emigration for primary 2")
	}
	rel("gamma_2", p[1].TemporaryEmigration.Estimate, gamma2, 1e-4)
	// The SE of B_1 by the stated delta method, stages independent
	// (Pollock 1982): var = SE(N_2)² + phi_1² SE(N_1)² + (N_1 − L_1)² SE(phi_1)².
	v := p[1].N.SE*p[1].N.SE + phi1*phi1*p[0].N.SE*p[0].N.SE + (N[0]-lost[0])*(N[0]-lost[0])*p[0].Phi.SE*p[0].Phi.SE
	rel("SE(B_1)", p[0].B.SE, math.Sqrt(v), 1e-3)
	t.Logf("by hand: N %.1f %.1f %.1f, phi_1 %.3f, phi_2 %.3f, B %.1f %.1f, gamma_2 %.3f (truth phi 0.7, gamma 0.2)", N[0], N[1], N[2], phi1, phi2, B1, B2, gamma2)
}
