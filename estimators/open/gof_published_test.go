package open

import (
	"math"
	"testing"
)

// TestTest2DipperByHand works TEST 2 of Burnham et al. (1987) by hand on
// the printed European dipper m-array (Lebreton et al. 1992;
// testdata/dipper-marray.csv, from memory), then follows c-hat into the
// QAICc model table.
//
// This is a WEAKER check than a published goodness-of-fit result: we
// could not recall the printed TEST 2 / TEST 3 statistics for the dipper
// (nor any other printed component test), so the expected values are the
// published rule (Burnham et al. 1987: for occasion i, animals released
// at i against animals released before i and next seen after i, by
// whether they were next seen at i+1 or later) applied by hand to
// published data, with the pooling rule stated on MinExpected (common
// practice). TEST 3 needs individual histories, which were not printed in
// a form we can recall, so it is not checked here.
//
// By hand, from the m-array rows R_i, m_ij (i released, j next seen):
//
//	2.CT_2: caught at 2 [m23, m24+..] = [24, 1]; not caught [m13, m14+..] = [2, 0]
//	2.CT_3: [m34, m35+..] = [34, 2];  [m14+m24, later] = [1, 0]
//	2.CT_4: [m45, m46+m47] = [45, 3]; [m15+m25+m35, later] = [2, 0]
//	2.CT_5: [m56, m57] = [51, 0];     [m16+m26+m36+m46, m17+..+m47] = [1, 2]
//	2.CL_2..2.CL_4: the row "not caught at i" is empty: untested.
//
// Every 2.CT table has an expected count below 2, so each goes to Fisher's
// exact test, whose two-sided P is the sum of the hypergeometric
// probabilities C(r1,a) C(r2,c1-a) / C(n,c1) no larger than the
// observed one (Fisher 1935):
//
//	2.CT_2: r1 25, r2 2, c1 26: P(a=24) = 25/27, P(a=25) = 2/27: P = 1
//	2.CT_3: r1 36, r2 1, c1 35: P(a=34) = 630/666, P(a=35) = 36/666: P = 1
//	2.CT_4: r1 48, r2 2, c1 47: a = 45, 46, 47 have 17296, 2256, 48 (/19600):
//	        the observed a = 45 is the most probable: P = 1
//	2.CT_5: r1 51, r2 3, c1 52: a = 49, 50, 51 have 1275, 153, 3 (/1431):
//	        the observed a = 51 is the least probable: P = 3/1431
//
// Each enters the total as the 1-df chi-square with the same upper tail,
// X² = (√2 erfc⁻¹(P))², so TEST 2 = X²(3/1431) = 9.463 on 4 df and
// c-hat = 2.366 > 1: the model table must switch to QAICc.
func TestTest2DipperByHand(t *testing.T) {
	g, err := Test2FromMArray(dipper(t))
	if err != nil {
		t.Fatal(err)
	}
	hand := []struct {
		occ      int
		observed [2][2]int
		p        float64
	}{
		{2, [2][2]int{{24, 1}, {2, 0}}, 1},
		{3, [2][2]int{{34, 2}, {1, 0}}, 1},
		{4, [2][2]int{{45, 3}, {2, 0}}, 1},
		{5, [2][2]int{{51, 0}, {1, 2}}, 3.0 / 1431},
	}
	for _, h := range hand {
		c := findComponent(t, g, Test2CT, h.occ)
		for r := 0; r < 2; r++ {
			for j := 0; j < 2; j++ {
				if c.Observed[r][j] != h.observed[r][j] {
					t.Errorf("2.CT_%d observed %v, by hand %v", h.occ, c.Observed, h.observed)
				}
			}
		}
		if !c.Tested || !c.Fisher || c.DF != 1 || math.Abs(c.P-h.p) > 1e-12 {
			t.Errorf("2.CT_%d: tested %v Fisher %v df %d P %.6g, by hand Fisher P %.6g on 1 df", h.occ, c.Tested, c.Fisher, c.DF, c.P, h.p)
		}
	}
	for occ := 2; occ <= 4; occ++ {
		if c := findComponent(t, g, Test2CL, occ); c.Tested {
			t.Errorf("2.CL_%d tested, but its row \"not caught\" is empty: %v", occ, c.Observed)
		}
	}
	z := math.Sqrt2 * math.Erfcinv(3.0/1431)
	x2 := z * z
	if math.Abs(x2-9.463) > 0.0005 { // the figure of the comment, by hand
		t.Fatalf("hand X² %.4f", x2)
	}
	if g.Overall.DF != 4 || math.Abs(g.Overall.ChiSquare-x2) > 1e-6 || math.Abs(g.CHat-x2/4) > 1e-6 || !g.UseQAICc {
		t.Fatalf("TEST 2 = %.4f on %d df, c-hat %.4f (QAICc %v); by hand %.4f on 4, c-hat %.4f", g.Overall.ChiSquare, g.Overall.DF, g.CHat, g.UseQAICc, x2, x2/4)
	}

	// QAICc with this c-hat (Burnham & Anderson 2002, sec. 2.5): -2lnL/c +
	// 2(K+1) + 2(K+1)(K+2)/(n-K-2), one parameter added for c-hat, n =
	// 426 releases, K = 2, 7, 7, 11; -2lnL from the independent fit of
	// testdata/cjs_reference.json (the same figures as TestCJSTableDipper).
	cHat := g.SelectionCHat()
	tab, err := CJSTable([]MArray{dipper(t)}, nil, nil, cHat)
	if err != nil {
		t.Fatal(err)
	}
	if tab.CriterionName != "QAICc" {
		t.Fatalf("criterion %s with c-hat %.3f", tab.CriterionName, cHat)
	}
	qaicc := func(m2ll float64, k int) float64 {
		k1 := float64(k + 1)
		return m2ll/cHat + 2*k1 + 2*k1*(k1+1)/(426-k1-1)
	}
	want := map[string]float64{
		"CJS phi(.) p(.)": qaicc(666.83766, 2),
		"CJS phi(t) p(.)": qaicc(659.73009, 7),
		"CJS phi(.) p(t)": qaicc(664.48017, 7),
		"CJS phi(t) p(t)": qaicc(656.95021, 11),
	}
	prev := math.Inf(-1)
	for _, row := range tab.Rows {
		w, ok := want[row.Result.Method]
		if !ok || math.Abs(row.Criterion-w) > 1e-3 {
			t.Errorf("%s: QAICc %.4f, by hand %.4f", row.Result.Method, row.Criterion, w)
		}
		if row.Criterion < prev {
			t.Errorf("rows not in QAICc order")
		}
		prev = row.Criterion
	}
	// phi(.) p(.) ranks first under AICc too (TestCJSTableDipper); with
	// c-hat 2.37 the extra parameters of the other models cost more
	// against a deflated deviance, so its lead must widen.
	plain, err := CJSTable([]MArray{dipper(t)}, nil, nil, 1)
	if err != nil {
		t.Fatal(err)
	}
	if tab.Rows[0].Result.Method != "CJS phi(.) p(.)" || plain.Rows[0].Result.Method != "CJS phi(.) p(.)" || tab.Rows[1].Delta <= plain.Rows[1].Delta {
		t.Errorf("QAICc best %s (lead %.2f), AICc best %s (lead %.2f)", tab.Rows[0].Result.Method, tab.Rows[1].Delta, plain.Rows[0].Result.Method, plain.Rows[1].Delta)
	}
}
