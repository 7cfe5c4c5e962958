package closed

import (
	"errors"
	"math"
	"testing"
)

// The removal estimators against the published formulas, worked by hand.
//
// This is a WEAKER check than a published worked example. We could not
// recall the catches and printed estimates of any removal example (Zippin
// 1956, 1958; Carle & Strub 1978; Seber 1982, ch. 7) surely enough to use
// them, so the catches below are invented and the expected values are the
// published formulas worked by hand: closed forms where the literature
// gives them or where Zippin's equation reduces to one, and a direct
// search of Carle & Strub's weighted likelihood written out here. The
// published table of Zippin's coefficient of variation is checked in
// TestZippinVariancePublishedTable, and the likelihoods against scipy in
// TestRemovalAgainstScipy.

// TestRemovalTwoPassSeberLeCren: with two passes Zippin's estimate is the
// two-sample removal estimate N = c1²/(c1 − c2), p = (c1 − c2)/c1, and its
// variance is c1² c2² (c1 + c2)/(c1 − c2)⁴ (Seber & Le Cren 1967; Seber
// 1982, ch. 7; both formulas from memory, and the variance re-derived by
// hand from Zippin's general variance with k = 2, where
// (1−q²)² − 4p²q = p⁴).
func TestRemovalTwoPassSeberLeCren(t *testing.T) {
	for _, c := range [][2]float64{{60, 20}, {113, 52}, {31, 9}, {500, 410}} {
		c1, c2 := c[0], c[1]
		z, err := Zippin([]int{int(c1), int(c2)})
		if err != nil {
			t.Fatal(err)
		}
		wantN := c1 * c1 / (c1 - c2)
		wantVar := c1 * c1 * c2 * c2 * (c1 + c2) / math.Pow(c1-c2, 4)
		near(t, "two-pass N", z.N.Estimate, wantN, 1e-7*wantN)
		near(t, "two-pass var(N)", z.N.SE*z.N.SE, wantVar, 1e-6*wantVar)
		p, _ := z.Param("p")
		near(t, "two-pass p", p.Estimate, (c1-c2)/c1, 1e-9)
	}
	// Equal catches: no depletion, no estimate (c1 − c2 = 0 in the
	// denominator).
	if _, err := Zippin([]int{40, 40}); !errors.Is(err, ErrNoDepletion) {
		t.Errorf("equal catches: %v", err)
	}
}

// TestRemovalThreePassClosedForm: with k = 3, Zippin's equation
// q/p − 3q³/(1 − q³) = R (R = X/T, X = c2 + 2c3) reduces by hand to a
// quadratic. Writing 1 − q³ = p(1 + q + q²) and clearing p gives
// q + q² − 2q³ = R(1 − q³), whose root q = 1 factors out, leaving
//
//	(R − 2) q² + (R − 1) q + R = 0,  q = [√(1 + 6R − 3R²) − (1 − R)] / (2(2 − R)),
//
// the root in (0, 1) when R < 1; then N = T/(1 − q³). (The reduction is
// worked here; that Seber (1982, ch. 7) notes the three-pass case reduces
// to a quadratic is from memory.)
func TestRemovalThreePassClosedForm(t *testing.T) {
	for _, c := range [][3]int{{65, 43, 26}, {120, 60, 30}, {30, 26, 21}, {12, 4, 1}} {
		T := float64(c[0] + c[1] + c[2])
		R := float64(c[1]+2*c[2]) / T
		q := (math.Sqrt(1+6*R-3*R*R) - (1 - R)) / (2 * (2 - R))
		wantN := T / (1 - q*q*q)
		z, err := Zippin(c[:])
		if err != nil {
			t.Fatal(err)
		}
		near(t, "three-pass N", z.N.Estimate, wantN, 1e-6*wantN)
		p, _ := z.Param("p")
		near(t, "three-pass p", p.Estimate, 1-q, 1e-8)
		// Zippin's (1956) variance at these values, written out for k = 3:
		// N q³ (1 − q³)/[(1 − q³)² − 9p²q²].
		pp := 1 - q
		v := wantN * q * q * q * (1 - q*q*q) / ((1-q*q*q)*(1-q*q*q) - 9*pp*pp*q*q)
		near(t, "three-pass var(N)", z.N.SE*z.N.SE, v, 1e-5*v)
	}
	// R >= 1 (X/T at or above (k−1)/2): the catches do not decline on
	// average and Zippin's equation has no root in (0, 1).
	if _, err := Zippin([]int{20, 20, 20}); !errors.Is(err, ErrNoDepletion) {
		t.Errorf("flat catches: %v", err)
	}
}

// TestRemovalCarleStrubWeightedLikelihood: Carle & Strub (1978) take N as the
// integer maximising Zippin's likelihood integrated over p with a uniform
// weight. Written out here from the model (catches multinomial with cell
// probabilities p q^(i−1), q^k for never caught):
//
//	L(N) ∝ N!/(N − T)! · ∫ p^T q^(k(N−T) + X) dp = N!/(N − T)! · B(T + 1, k(N − T) + X + 1),
//
// with X = Σ (i−1) c_i. The test finds the argmax over N = T..T+5000 by
// evaluating it directly (log-gamma), which shares nothing with the
// production's ratio criterion. It also checks the property Carle & Strub
// give for the method (from memory): an estimate exists even for catches
// that do not decline, where Zippin's has none.
func TestRemovalCarleStrubWeightedLikelihood(t *testing.T) {
	lbeta := func(a, b float64) float64 {
		x, _ := math.Lgamma(a)
		y, _ := math.Lgamma(b)
		z, _ := math.Lgamma(a + b)
		return x + y - z
	}
	for _, c := range [][]int{{65, 43, 26}, {31, 9}, {12, 4, 1}, {30, 26, 21, 18}, {10, 12, 15}, {7, 7, 6}} {
		k := float64(len(c))
		T, X := 0.0, 0.0
		for i, v := range c {
			T += float64(v)
			X += float64(i * v)
		}
		best, bestN := math.Inf(-1), 0.0
		for N := T; N <= T+5000; N++ {
			a, _ := math.Lgamma(N + 1)
			b, _ := math.Lgamma(N - T + 1)
			if ll := a - b + lbeta(T+1, k*(N-T)+X+1); ll > best {
				best, bestN = ll, N
			}
		}
		if bestN >= T+5000 {
			t.Fatalf("%v: no maximum in the search range", c)
		}
		cs, err := CarleStrub(c)
		if err != nil {
			t.Fatalf("%v: %v", c, err)
		}
		near(t, "Carle-Strub N", cs.N.Estimate, bestN, 0)
		p, _ := cs.Param("p")
		// p given N: T/(T + X + k(N − T)), the mode of the weighted p.
		near(t, "Carle-Strub p", p.Estimate, T/(T+X+k*(bestN-T)), 1e-12)
		if _, zerr := Zippin(c); zerr != nil && !errors.Is(zerr, ErrNoDepletion) {
			t.Errorf("%v: Zippin: %v", c, zerr)
		}
	}
	if _, err := Zippin([]int{10, 12, 15}); !errors.Is(err, ErrNoDepletion) {
		t.Error("rising catches: Zippin should have no estimate")
	}
}
