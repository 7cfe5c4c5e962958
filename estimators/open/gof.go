package open

import (
	"fmt"
	"math"
	"sort"

	"gonum.org/v1/gonum/stat/distuv"

	"tagtally/estimators"
)

// Names of the goodness-of-fit components, as the literature writes them
// (Burnham et al. 1987; Pradel, Gimenez & Lebreton 2005).
const (
	Test3SR = "TEST 3.SR"
	Test3SM = "TEST 3.SM"
	Test2CT = "TEST 2.CT"
	Test2CL = "TEST 2.CL"
)

// MinExpected is the smallest expected cell count a Pearson chi-square
// component is computed on. Columns of the r×c tables (3.SM, 2.CL) are
// pooled, later occasions into earlier ones, until every expected count is
// at least this; a 2×2 table (3.SR, 2.CT) that still has a smaller expected
// count is tested with Fisher's exact test instead. Burnham et al. (1987)
// pool sparse cells before summing chi-square components; the threshold of
// 2 is the value commonly used with these tests (common practice; the exact
// threshold in Burnham et al. 1987 is from memory).
const MinExpected = 2.0

// GOFComponent is one contingency table of the component tests, at one
// occasion.
type GOFComponent struct {
	// Test is one of Test3SR, Test3SM, Test2CT, Test2CL.
	Test string `json:"test"`
	// Group is the group label for GoodnessOfFitByGroup, "" otherwise.
	Group string `json:"group,omitempty"`
	// Occasion is the occasion i (1-based) the table is about.
	Occasion int `json:"occasion"`
	// Rows names the two rows of Observed, e.g. "previously marked" and
	// "newly marked".
	Rows [2]string `json:"rows"`
	// Columns names the columns of Observed before pooling, e.g. "next seen
	// at 4".
	Columns []string `json:"columns"`
	// Observed is the table before pooling: Observed[r][c].
	Observed [2][]int `json:"observed"`
	// Pooled is the table the statistic was computed on, after pooling
	// sparse columns; PooledColumns names its columns.
	Pooled        [2][]int `json:"pooled"`
	PooledColumns []string `json:"pooled_columns"`
	// ChiSquare is Pearson's X² = Σ (O-E)²/E on Pooled (no continuity
	// correction). When Fisher is true it is instead the 1-df chi-square
	// value with the same upper-tail probability as Fisher's exact P, so
	// that the component can be summed with the others.
	ChiSquare float64 `json:"chi_square"`
	// DF is (rows-1)(columns-1) of Pooled; 0 when the table could not be
	// tested (then Tested is false and Note says why).
	DF int `json:"df"`
	// P is the upper-tail probability of ChiSquare on DF degrees of
	// freedom, or Fisher's two-sided exact P.
	P      float64 `json:"p"`
	Fisher bool    `json:"fisher_exact"`
	Tested bool    `json:"tested"`
	Note   string  `json:"note,omitempty"`
}

// GOFTotal is a sum of tested components.
type GOFTotal struct {
	Name       string  `json:"name"`
	ChiSquare  float64 `json:"chi_square"`
	DF         int     `json:"df"`
	P          float64 `json:"p"`
	Components int     `json:"components"`
}

// GOF is the outcome of the component goodness-of-fit tests for the
// Cormack-Jolly-Seber model phi(t) p(t).
type GOF struct {
	Method     string         `json:"method"`
	Components []GOFComponent `json:"components"`
	// Totals for each component family, for TEST 3 (3.SR + 3.SM), TEST 2
	// (2.CT + 2.CL) and the overall TEST 2 + TEST 3.
	SR, SM, CT, CL, Test3, Test2, Overall GOFTotal
	// CHat is the overdispersion factor Overall.ChiSquare / Overall.DF
	// (Lebreton et al. 1992; Burnham & Anderson 2002, sec. 2.5); 1 when no
	// component could be tested.
	CHat float64 `json:"c_hat"`
	// UseQAICc is true when CHat > 1: rank models by QAICc
	// (estimators.Select with cHat = CHat).
	UseQAICc       bool     `json:"use_qaicc"`
	Recommendation string   `json:"recommendation"`
	Assumptions    []string `json:"assumptions"`
	Warnings       []string `json:"warnings,omitempty"`
	References     []string `json:"references"`
}

// SelectionCHat is the c-hat to pass to estimators.Select: CHat when it is
// above 1, else 1 (a c-hat below 1 is not used to inflate the fit of the
// models; Burnham & Anderson 2002, sec. 2.5).
func (g *GOF) SelectionCHat() float64 {
	if g.CHat > 1 {
		return g.CHat
	}
	return 1
}

// GoodnessOfFit computes the component goodness-of-fit tests of the
// Cormack-Jolly-Seber model with time-dependent survival and capture
// probability (Burnham et al. 1987; Pollock, Hines & Nichols 1985), with
// the component names used by Pradel, Gimenez & Lebreton (2005), from
// individual capture histories. Occasions i below are 1-based, k is the number of occasions,
// and "released at i" means caught at i and not lost on capture there.
//
//	TEST 3.SR_i (i = 2..k-1): animals released at i; rows: seen before i
//	  vs first caught at i; columns: seen again after i vs never seen again.
//	  Detects transients (newly marked animals less likely to return).
//	TEST 3.SM_i (i = 2..k-2): animals released at i and seen again; same
//	  rows; columns: occasion j = i+1..k at which next seen.
//	TEST 2.CT_i (i = 2..k-2): animals released at or before i and seen
//	  again after i (so known alive at i); rows: caught at i (newly or
//	  previously marked) vs not caught at i; columns: next seen at i+1 vs
//	  next seen later. Detects trap-dependence (trap-happy animals are
//	  more often next seen at i+1).
//	TEST 2.CL_i (i = 2..k-3): the rest of that table: the same animals that
//	  were next seen after i+1; same rows; columns: occasion j = i+2..k at
//	  which next seen.
//
// The row "caught at i" of TEST 2 pools newly and previously marked
// animals, as the m-array form of TEST 2 does (releases at i of both
// kinds; Burnham et al. 1987), while TEST 3.SM compares the two kinds: the
// two comparisons then partition the information without overlap. (Had
// TEST 2 kept only previously marked animals, the same animals would be
// compared twice and the components would be positively correlated: in
// our simulations the variance of the overall statistic rose from about
// 2df to 2.4df and its 5% test rejected 6.8% of CJS data sets.)
//
// Each table gets Pearson's X² = Σ (O-E)²/E with E = row total × column
// total / n and (r-1)(c-1) degrees of freedom; P from the chi-square
// distribution. Sparse columns are pooled as described for MinExpected; a
// 2×2 table with an expected count below MinExpected is tested with Fisher's
// exact test (two-sided: the sum of the probabilities of all tables with the
// same margins no more probable than the observed one), and its chi-square
// contribution is the 1-df value with that upper-tail probability. Tables
// with an empty row or column, or that pool down to one column, are
// reported untested and add nothing.
//
// The overall statistic is the sum of the tested components; c-hat =
// X²/df estimates overdispersion (Lebreton et al. 1992). With c-hat > 1 the
// model ranking should use QAICc with that c-hat (Burnham & Anderson 2002);
// c-hat well above 3 suggests structural lack of fit (transients,
// trap-dependence, heterogeneity) that a model should address rather than
// a variance inflation (Lebreton et al. 1992, from memory).
//
// Losses on capture (h.Removed) are honoured: an animal lost at its last
// capture is not released there and does not count in the tables of that
// occasion. Group labels are ignored here; GoodnessOfFitByGroup tests
// each group and sums.
//
// Errors: estimators.ErrNoData for empty input, estimators.ErrInvalidInput
// for malformed histories, estimators.ErrTooFewOccasions for fewer than 3
// occasions (3.SR needs an occasion with one before and one after it).
func GoodnessOfFit(h *estimators.Histories) (*GOF, error) {
	if err := h.Validate(); err != nil {
		return nil, fmt.Errorf("goodness of fit: %w", err)
	}
	k := h.Occasions()
	if k < 3 {
		return nil, fmt.Errorf("goodness of fit: %w: %d occasions, the component tests need at least 3", estimators.ErrTooFewOccasions, k)
	}
	tab := gofCount(h)
	g := &GOF{Method: "CJS goodness of fit: TEST 2 and TEST 3 components"}
	for i := 1; i <= k-2; i++ {
		g.Components = append(g.Components, tab.component(Test3SR, i))
		if i <= k-3 {
			g.Components = append(g.Components, tab.component(Test3SM, i))
			g.Components = append(g.Components, tab.component(Test2CT, i))
		}
		if i <= k-4 {
			g.Components = append(g.Components, tab.component(Test2CL, i))
		}
	}
	g.finish()
	return g, nil
}

// Test2FromMArray computes the TEST 2 components (2.CT and 2.CL) from an
// m-array alone, for data kept only as an m-array. TEST 2 needs nothing
// more (Burnham et al. 1987): for occasion i, the row "caught at i" is
// m_ij, the animals released at i next seen at j > i, and the row "not
// caught at i" is Σ_{h<i} m_hj for j > i, the animals released before i
// whose next capture came after i. The tables, pooling, tests and c-hat are
// those of GoodnessOfFit, which gives the same TEST 2 from the histories.
// TEST 3 needs individual histories and is absent (its totals are zero and
// a warning says so), so c-hat here rests on TEST 2 alone.
//
// Errors: those of MArray.Validate, and estimators.ErrTooFewOccasions for
// fewer than 4 occasions (TEST 2.CT needs occasions i-1, i, i+1, i+2).
func Test2FromMArray(m MArray) (*GOF, error) {
	if err := m.Validate(); err != nil {
		return nil, fmt.Errorf("goodness of fit (TEST 2 from the m-array): %w", err)
	}
	k := m.Occasions()
	if k < 4 {
		return nil, fmt.Errorf("goodness of fit (TEST 2 from the m-array): %w: %d occasions, TEST 2 needs at least 4", estimators.ErrTooFewOccasions, k)
	}
	t := &gofCounts{k: k, sr: make([][2][2]int, k), ct: make([][2][2]int, k), sm: make([][2][]int, k), cl: make([][2][]int, k)}
	for i := 0; i < k; i++ {
		t.cl[i] = [2][]int{make([]int, k), make([]int, k)}
	}
	for i := 1; i <= k-3; i++ {
		for j := i + 1; j < k; j++ {
			t.add2(i, 0, j, m.M[i][j])
			for h := 0; h < i; h++ {
				t.add2(i, 1, j, m.M[h][j])
			}
		}
	}
	g := &GOF{Method: "CJS goodness of fit: TEST 2 components from the m-array"}
	for i := 1; i <= k-3; i++ {
		g.Components = append(g.Components, t.component(Test2CT, i))
		if i <= k-4 {
			g.Components = append(g.Components, t.component(Test2CL, i))
		}
	}
	g.finish()
	g.Overall.Name = "TEST 2"
	g.Warnings = append(g.Warnings, "TEST 3 needs individual capture histories and is not included: c-hat rests on TEST 2 alone.")
	return g, nil
}

// GoodnessOfFitByGroup runs the component tests separately in each group
// of h.Groups (e.g. sex) and sums them, the usual way to test a model
// with group effects, phi(g*t) p(g*t) (Burnham et al. 1987; Lebreton et
// al. 1992): the combined result's components carry their Group, its
// totals and c-hat are over every group's tested tables. The per-group
// results are returned too, in sorted order of the labels (an empty label
// is a group named "(none)"). Errors as for GoodnessOfFit, and
// estimators.ErrInvalidInput when h.Groups is nil.
func GoodnessOfFitByGroup(h *estimators.Histories) (*GOF, []*GOF, error) {
	if err := h.Validate(); err != nil {
		return nil, nil, fmt.Errorf("goodness of fit by group: %w", err)
	}
	if h.Groups == nil {
		return nil, nil, fmt.Errorf("goodness of fit by group: %w: the histories have no group labels", estimators.ErrInvalidInput)
	}
	byGroup := map[string]*estimators.Histories{}
	var names []string
	for a, row := range h.Caught {
		g := h.Groups[a]
		if g == "" {
			g = "(none)"
		}
		sub, ok := byGroup[g]
		if !ok {
			sub = &estimators.Histories{}
			if h.Removed != nil {
				sub.Removed = []bool{}
			}
			byGroup[g] = sub
			names = append(names, g)
		}
		sub.Caught = append(sub.Caught, row)
		if h.Removed != nil {
			sub.Removed = append(sub.Removed, h.Removed[a])
		}
	}
	sort.Strings(names)
	all := &GOF{Method: "CJS goodness of fit by group: TEST 2 and TEST 3 components summed over groups"}
	var per []*GOF
	for _, name := range names {
		g, err := GoodnessOfFit(byGroup[name])
		if err != nil {
			return nil, nil, fmt.Errorf("goodness of fit, group %q: %w", name, err)
		}
		for i := range g.Components {
			g.Components[i].Group = name
		}
		per = append(per, g)
		all.Components = append(all.Components, g.Components...)
	}
	all.finish()
	return all, per, nil
}

// finish sorts the components and fills the totals, c-hat, the
// recommendation, assumptions, warnings and references.
func (g *GOF) finish() {
	sort.SliceStable(g.Components, func(a, b int) bool {
		if g.Components[a].Group != g.Components[b].Group {
			return g.Components[a].Group < g.Components[b].Group
		}
		ra, rb := gofComponentRank(g.Components[a].Test), gofComponentRank(g.Components[b].Test)
		if ra != rb {
			return ra < rb
		}
		return g.Components[a].Occasion < g.Components[b].Occasion
	})

	g.SR = gofTotalOf(Test3SR, g.Components, Test3SR)
	g.SM = gofTotalOf(Test3SM, g.Components, Test3SM)
	g.CT = gofTotalOf(Test2CT, g.Components, Test2CT)
	g.CL = gofTotalOf(Test2CL, g.Components, Test2CL)
	g.Test3 = gofTotalOf("TEST 3", g.Components, Test3SR, Test3SM)
	g.Test2 = gofTotalOf("TEST 2", g.Components, Test2CT, Test2CL)
	g.Overall = gofTotalOf("TEST 2 + TEST 3", g.Components, Test3SR, Test3SM, Test2CT, Test2CL)

	g.Assumptions = []string{
		"The tests check the Cormack-Jolly-Seber model phi(t) p(t): every marked animal alive at an occasion has the same chance to be caught and to survive to the next, whatever its past captures.",
		"Animals act independently; marks are not lost or misread.",
		"Sparse columns are pooled until every expected count is at least 2; a 2×2 table still sparser is tested with Fisher's exact test.",
	}
	g.References = []string{
		"Burnham, K.P., Anderson, D.R., White, G.C., Brownie, C. & Pollock, K.H. (1987) Design and analysis methods for fish survival experiments based on release-recapture. American Fisheries Society Monograph 5.",
		"Pollock, K.H., Hines, J.E. & Nichols, J.D. (1985) Goodness-of-fit tests for open capture-recapture models. Biometrics 41: 399-410.",
		"Pradel, R., Gimenez, O. & Lebreton, J.-D. (2005) Principles and interest of GOF tests for multistate capture-recapture models. Animal Biodiversity and Conservation 28: 189-204.",
		"Lebreton, J.-D., Burnham, K.P., Clobert, J. & Anderson, D.R. (1992) Modeling survival and testing biological hypotheses using marked animals. Ecological Monographs 62: 67-118.",
		"Burnham, K.P. & Anderson, D.R. (2002) Model Selection and Multimodel Inference, 2nd ed. Springer.",
	}

	if g.Overall.DF == 0 {
		g.CHat = 1
		g.Warnings = append(g.Warnings, "No component table could be tested (too few recaptures): goodness of fit is unknown and c-hat is set to 1.")
		g.Recommendation = "Fit is untested; rank models by AICc but read them with care."
		return
	}
	g.CHat = g.Overall.ChiSquare / float64(g.Overall.DF)
	untested := 0
	for _, c := range g.Components {
		if !c.Tested {
			untested++
		}
	}
	if untested > 0 {
		g.Warnings = append(g.Warnings, fmt.Sprintf("%d of %d component tables were too sparse to test and add nothing to the totals.", untested, len(g.Components)))
	}
	switch {
	case g.CHat > 1:
		g.UseQAICc = true
		g.Recommendation = fmt.Sprintf("c-hat = %.3g > 1: the data are overdispersed relative to the CJS model; rank models by QAICc with c-hat = %.3g and inflate standard errors by sqrt(c-hat).", g.CHat, g.CHat)
	default:
		g.Recommendation = fmt.Sprintf("c-hat = %.3g <= 1: no sign of overdispersion; rank models by AICc (c-hat is not set below 1).", g.CHat)
	}
	if g.CHat > 3 {
		g.Warnings = append(g.Warnings, fmt.Sprintf("c-hat = %.3g is above 3: this suggests structural lack of fit (e.g. transients when TEST 3 dominates, trap-dependence when TEST 2.CT does) that a model should address, not only variance inflation.", g.CHat))
	}
	if g.SR.DF > 0 && g.SR.P < 0.05 {
		g.Warnings = append(g.Warnings, fmt.Sprintf("TEST 3.SR rejects (P = %.3g): newly marked animals are seen again at a different rate from previously marked ones, as with transients; consider a model with a different survival for the interval after first capture.", g.SR.P))
	}
	if g.CT.DF > 0 && g.CT.P < 0.05 {
		g.Warnings = append(g.Warnings, fmt.Sprintf("TEST 2.CT rejects (P = %.3g): animals caught at one occasion are more (trap-happy) or less (trap-shy) likely to be caught at the next; consider a trap-dependence model.", g.CT.P))
	}
}

func gofComponentRank(t string) int {
	switch t {
	case Test3SR:
		return 0
	case Test3SM:
		return 1
	case Test2CT:
		return 2
	default:
		return 3
	}
}

func gofTotalOf(name string, comps []GOFComponent, tests ...string) GOFTotal {
	t := GOFTotal{Name: name}
	for _, c := range comps {
		if !c.Tested {
			continue
		}
		for _, want := range tests {
			if c.Test == want {
				t.ChiSquare += c.ChiSquare
				t.DF += c.DF
				t.Components++
			}
		}
	}
	t.P = 1
	if t.DF > 0 {
		t.P = distuv.ChiSquared{K: float64(t.DF)}.Survival(t.ChiSquare)
	}
	return t
}

var (
	rowsNewOld   = [2]string{"previously marked", "newly marked"}
	rowsCaughtAt = [2]string{"caught at i", "not caught at i"}
)

// gofCounts holds every component table, filled in one pass over the
// animals (0-based occasions). sr[i] and ct[i] are 2×2; sm[i][r][j] and
// cl[i][r][j] count animals next seen at occasion j.
type gofCounts struct {
	k      int
	sr, ct [][2][2]int
	sm, cl [][2][]int
}

// gofCount builds the tables. For each animal with captures c_1 < c_2 <
// ... (the last possibly a loss on capture):
//
//   - each release at c (not the loss) adds to 3.SR_c, and, when seen
//     again at next, to 3.SM_c, in row "newly marked" when c is the first
//     capture;
//   - each capture c (from occasion 2) followed by another at next adds
//     to row "caught at i" of 2.CT_c (and 2.CL_c when next > c+1);
//   - each occasion i strictly between two consecutive captures adds to
//     row "not caught at i" of 2.CT_i (and 2.CL_i when next > i+1).
//
// The cost is one pass over the histories, O(animals × occasions).
func gofCount(h *estimators.Histories) *gofCounts {
	k := h.Occasions()
	t := &gofCounts{k: k, sr: make([][2][2]int, k), ct: make([][2][2]int, k), sm: make([][2][]int, k), cl: make([][2][]int, k)}
	for i := 0; i < k; i++ {
		t.sm[i] = [2][]int{make([]int, k), make([]int, k)}
		t.cl[i] = [2][]int{make([]int, k), make([]int, k)}
	}
	caps := make([]int, 0, k)
	for a, row := range h.Caught {
		caps = caps[:0]
		for j, c := range row {
			if c {
				caps = append(caps, j)
			}
		}
		removed := h.Removed != nil && h.Removed[a]
		f := caps[0]
		for idx, c := range caps {
			next := -1
			if idx+1 < len(caps) {
				next = caps[idx+1]
			}
			released := !(removed && idx == len(caps)-1)
			if released && c >= 1 && c <= k-2 {
				r := 0
				if c == f {
					r = 1
				}
				if next >= 0 {
					t.sr[c][r][0]++
					t.sm[c][r][next]++
				} else {
					t.sr[c][r][1]++
				}
			}
			if next < 0 {
				continue
			}
			if c >= 1 && c <= k-3 {
				t.add2(c, 0, next, 1)
			}
			for i := max(c+1, 1); i < next && i <= k-3; i++ {
				t.add2(i, 1, next, 1)
			}
		}
	}
	return t
}

// add2 counts n animals known alive at i (row r) next seen at next > i in
// the TEST 2 tables.
func (t *gofCounts) add2(i, r, next, n int) {
	if next == i+1 {
		t.ct[i][r][0] += n
		return
	}
	t.ct[i][r][1] += n
	t.cl[i][r][next] += n
}

// component returns the tested table of one component at occasion i
// (0-based).
func (t *gofCounts) component(test string, i int) GOFComponent {
	c := GOFComponent{Test: test, Occasion: i + 1}
	pool := false
	switch test {
	case Test3SR:
		c.Rows = rowsNewOld
		c.Columns = []string{"seen again", "never seen again"}
		c.Observed = [2][]int{t.sr[i][0][:], t.sr[i][1][:]}
	case Test2CT:
		c.Rows = rowsCaughtAt
		c.Columns = []string{fmt.Sprintf("next seen at %d", i+2), "next seen later"}
		c.Observed = [2][]int{t.ct[i][0][:], t.ct[i][1][:]}
	case Test3SM, Test2CL:
		pool = true
		from, counts := i+1, t.sm[i]
		c.Rows = rowsNewOld
		if test == Test2CL {
			from, counts = i+2, t.cl[i]
			c.Rows = rowsCaughtAt
		}
		for j := from; j < t.k; j++ {
			c.Columns = append(c.Columns, fmt.Sprintf("next seen at %d", j+1))
		}
		c.Observed = [2][]int{counts[0][from:], counts[1][from:]}
	}
	c.Observed = [2][]int{append([]int(nil), c.Observed[0]...), append([]int(nil), c.Observed[1]...)}
	testTable(&c, pool)
	return c
}

// testTable pools (when pool is true) and tests c.Observed, filling the
// remaining fields of c.
func testTable(c *GOFComponent, pool bool) {
	cols := len(c.Observed[0])
	rowTot := [2]int{}
	colTot := make([]int, cols)
	for r := 0; r < 2; r++ {
		for j, v := range c.Observed[r] {
			rowTot[r] += v
			colTot[j] += v
		}
	}
	n := rowTot[0] + rowTot[1]
	c.P = 1
	if rowTot[0] == 0 || rowTot[1] == 0 {
		c.Pooled = [2][]int{append([]int(nil), c.Observed[0]...), append([]int(nil), c.Observed[1]...)}
		c.PooledColumns = append([]string(nil), c.Columns...)
		c.Note = "a row is empty: nothing to compare"
		return
	}
	// Group columns: pooling adds later columns into the current group
	// until the group's smaller expected count, colTotal·minRow/n, reaches
	// MinExpected; a short remainder joins the last group.
	var groups [][]int
	if pool {
		minRow := float64(min(rowTot[0], rowTot[1]))
		var cur []int
		curTot := 0
		for j := 0; j < cols; j++ {
			cur = append(cur, j)
			curTot += colTot[j]
			if float64(curTot)*minRow/float64(n) >= MinExpected {
				groups = append(groups, cur)
				cur, curTot = nil, 0
			}
		}
		if len(cur) > 0 {
			if len(groups) > 0 {
				groups[len(groups)-1] = append(groups[len(groups)-1], cur...)
			} else {
				groups = append(groups, cur)
			}
		}
	} else {
		for j := 0; j < cols; j++ {
			groups = append(groups, []int{j})
		}
	}
	c.Pooled = [2][]int{make([]int, len(groups)), make([]int, len(groups))}
	c.PooledColumns = make([]string, len(groups))
	pooledCol := make([]int, len(groups))
	for gi, grp := range groups {
		for _, j := range grp {
			c.Pooled[0][gi] += c.Observed[0][j]
			c.Pooled[1][gi] += c.Observed[1][j]
		}
		pooledCol[gi] = c.Pooled[0][gi] + c.Pooled[1][gi]
		if len(grp) == 1 {
			c.PooledColumns[gi] = c.Columns[grp[0]]
		} else {
			c.PooledColumns[gi] = c.Columns[grp[0]] + " to " + c.Columns[grp[len(grp)-1]]
		}
	}
	if len(groups) < 2 {
		c.Note = "too few animals to keep two columns after pooling"
		return
	}
	for _, t := range pooledCol {
		if t == 0 {
			c.Note = "a column is empty: nothing to compare"
			return
		}
	}
	x2 := 0.0
	minE := math.Inf(1)
	for r := 0; r < 2; r++ {
		for gi := range groups {
			e := float64(rowTot[r]) * float64(pooledCol[gi]) / float64(n)
			minE = math.Min(minE, e)
			d := float64(c.Pooled[r][gi]) - e
			x2 += d * d / e
		}
	}
	c.Tested = true
	c.DF = len(groups) - 1
	if len(groups) == 2 && minE < MinExpected {
		c.Fisher = true
		c.P = FisherExact2x2(c.Pooled[0][0], c.Pooled[0][1], c.Pooled[1][0], c.Pooled[1][1])
		c.ChiSquare = 0
		if c.P < 1 {
			c.ChiSquare = distuv.ChiSquared{K: 1}.Quantile(1 - c.P)
		}
		c.Note = "expected count below 2: Fisher's exact test"
		return
	}
	c.ChiSquare = x2
	c.P = distuv.ChiSquared{K: float64(c.DF)}.Survival(x2)
}

// FisherExact2x2 is the two-sided P of Fisher's exact test for the 2×2
// table [[a, b], [c, d]]: with the margins fixed, the count in the first
// cell is hypergeometric, and P is the total probability of the tables no
// more probable than the observed one (Fisher 1935; Agresti 2002,
// sec. 3.5). A relative tolerance of 1e-7 counts tables tied in
// probability with the observed one, so rounding does not drop them.
// A table with a negative count is not a table of counts: P = 1.
func FisherExact2x2(a, b, c, d int) float64 {
	if a < 0 || b < 0 || c < 0 || d < 0 {
		return 1
	}
	r1, r2, c1 := a+b, c+d, a+c
	n := r1 + r2
	if n == 0 {
		return 1
	}
	lo := max(0, c1-r2)
	hi := min(r1, c1)
	logP := func(x int) float64 {
		return gofLchoose(r1, x) + gofLchoose(r2, c1-x) - gofLchoose(n, c1)
	}
	obs := logP(a)
	p := 0.0
	for x := lo; x <= hi; x++ {
		lp := logP(x)
		if lp <= obs+1e-7 {
			p += math.Exp(lp)
		}
	}
	return math.Min(1, p)
}

func gofLchoose(n, k int) float64 {
	a, _ := math.Lgamma(float64(n + 1))
	b, _ := math.Lgamma(float64(k + 1))
	c, _ := math.Lgamma(float64(n - k + 1))
	return a - b - c
}
