package open

import (
	"encoding/json"
	"errors"
	"math"
	"os"
	"testing"

	"tagtally/estimators"
)

func dipper(t *testing.T) MArray {
	t.Helper()
	_, ms := readMArrayCSV(t, "testdata/dipper-marray.csv")
	return ms[0]
}

func param(t *testing.T, r *estimators.Result, name string) estimators.Named {
	t.Helper()
	p, ok := r.Param(name)
	if !ok {
		t.Fatalf("%s: no parameter %q", r.Method, name)
	}
	return p
}

// TestCJSDipperPublished compares phi(.) p(.) on the European dipper
// m-array with the published values.
func TestCJSDipperPublished(t *testing.T) {
	r, err := CJS(dipper(t), Constant, Constant)
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		what      string
		got, want float64
		tol       float64
	}{
		// Lebreton et al. (1992), dipper example, from memory (values in
		// testdata/README.md); tolerances cover the rounding of the recalled
		// figures.
		{"phi", param(t, r, "phi").Estimate, 0.560, 0.0006},
		{"SE(phi)", param(t, r, "phi").SE, 0.025, 0.0006},
		{"p", param(t, r, "p").Estimate, 0.903, 0.0006},
		{"SE(p)", param(t, r, "p").SE, 0.029, 0.002}, // "about 0.029"
		{"-2lnL", -2 * r.LogLik, 666.84, 0.01},
	} {
		if math.Abs(c.got-c.want) > c.tol {
			t.Errorf("%s = %.5f, want %.5f ± %g", c.what, c.got, c.want, c.tol)
		}
	}
	if r.Params != 2 || r.SampleSize != 426 { // 22+60+78+80+88+98 releases before the last occasion
		t.Errorf("K = %d, n = %d", r.Params, r.SampleSize)
	}
	// AICc by hand: 666.8377 + 2·2 + 2·2·3/(426-3) = 670.866.
	if math.Abs(r.AICc-670.866) > 0.001 {
		t.Errorf("AICc = %.4f", r.AICc)
	}
}

// TestCJSDipperTimePublished compares the time-dependent survival
// estimates on the dipper m-array with the values published for these data
// (the dipper example of Lebreton et al. 1992, and reproduced since in
// many analyses of the same m-array), recalled from memory to three
// decimals; the tolerance covers that rounding. Only the figures recalled
// with confidence are checked: the five identifiable survivals of
// phi(t) p(t), the first five survivals and p of phi(t) p(.), and the two
// models' -2 ln L (656.95 and 659.73, without the multinomial constant).
// The p(t) values of phi(t) p(t) and phi[6] of phi(t) p(.) are left out
// because the recalled figures were not sure to the third decimal.
func TestCJSDipperTimePublished(t *testing.T) {
	for _, c := range []struct {
		phi, p Structure
		m2lnL  float64
		want   map[string]float64
	}{
		{Time, Time, 656.95, map[string]float64{ // from memory
			"phi[1]": 0.718, "phi[2]": 0.435, "phi[3]": 0.478, "phi[4]": 0.626, "phi[5]": 0.599,
		}},
		{Time, Constant, 659.73, map[string]float64{ // from memory
			"phi[1]": 0.626, "phi[2]": 0.454, "phi[3]": 0.478, "phi[4]": 0.624, "phi[5]": 0.608, "p": 0.902,
		}},
	} {
		r, err := CJS(dipper(t), c.phi, c.p)
		if err != nil {
			t.Fatal(err)
		}
		if got := -2 * r.LogLik; math.Abs(got-c.m2lnL) > 0.006 {
			t.Errorf("%s: -2lnL = %.4f, published %.2f", r.Method, got, c.m2lnL)
		}
		for name, want := range c.want {
			if got := param(t, r, name).Estimate; math.Abs(got-want) > 0.0006 {
				t.Errorf("%s: %s = %.4f, published %.3f", r.Method, name, got, want)
			}
		}
	}
}

// TestCJSGridSearch checks the phi(.) p(.) maximum with a grid search over
// an independent cell-by-cell likelihood written here, without the
// production optimiser.
func TestCJSGridSearch(t *testing.T) {
	m := dipper(t)
	tt := m.Occasions()
	ll := func(phi, p float64) float64 {
		s := 0.0
		for i := 0; i < tt-1; i++ {
			sum, seen := 0.0, 0
			for j := i + 1; j < tt; j++ {
				pij := math.Pow(phi, float64(j-i)) * math.Pow(1-p, float64(j-i-1)) * p
				sum += pij
				seen += m.M[i][j]
				if m.M[i][j] > 0 {
					s += float64(m.M[i][j]) * math.Log(pij)
				}
			}
			s += float64(m.Released[i]-seen) * math.Log(1-sum)
		}
		return s
	}
	// A coarse grid over the whole plausible region, then a fine one
	// around its best cell.
	best, bphi, bp := math.Inf(-1), 0.0, 0.0
	for phi := 0.30; phi <= 0.90; phi += 0.002 {
		for p := 0.50; p <= 0.995; p += 0.002 {
			if v := ll(phi, p); v > best {
				best, bphi, bp = v, phi, p
			}
		}
	}
	const step = 0.00005
	c0, c1 := bphi, bp
	for phi := c0 - 0.004; phi <= c0+0.004; phi += step {
		for p := c1 - 0.004; p <= c1+0.004; p += step {
			if v := ll(phi, p); v > best {
				best, bphi, bp = v, phi, p
			}
		}
	}
	r, err := CJS(m, Constant, Constant)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(param(t, r, "phi").Estimate-bphi) > step || math.Abs(param(t, r, "p").Estimate-bp) > step {
		t.Errorf("fit phi=%.5f p=%.5f, grid phi=%.5f p=%.5f", param(t, r, "phi").Estimate, param(t, r, "p").Estimate, bphi, bp)
	}
	if r.LogLik < best-1e-9 || r.LogLik-best > 1e-3 {
		t.Errorf("lnL fit %.6f, grid %.6f", r.LogLik, best)
	}
}

type scipyFit struct {
	LogLik float64 `json:"loglik"`
	K      int     `json:"k"`
	Params map[string]struct {
		Estimate float64 `json:"estimate"`
		SE       float64 `json:"se"`
	} `json:"params"`
}

// TestCJSAgainstScipy compares every model with the independent fits of
// testdata/cjs_reference.py (scipy BFGS and Nelder-Mead on a cell-by-cell
// likelihood, SEs from its own finite-difference Hessian), whose output is
// committed in testdata/cjs_reference.json.
func TestCJSAgainstScipy(t *testing.T) {
	raw, err := os.ReadFile("testdata/cjs_reference.json")
	if err != nil {
		t.Fatal(err)
	}
	var ref map[string]json.RawMessage
	if err := json.Unmarshal(raw, &ref); err != nil {
		t.Fatal(err)
	}
	groupNames, groupMs := readMArrayCSV(t, "testdata/groups-marray.csv")
	for _, set := range []struct {
		key    string
		ms     []MArray
		groups []string
	}{
		{"dipper", []MArray{dipper(t)}, nil},
		{"groups", groupMs, groupNames},
	} {
		var fits map[string]scipyFit
		if err := json.Unmarshal(ref[set.key], &fits); err != nil {
			t.Fatal(err)
		}
		if len(fits) < 4 {
			t.Fatalf("%s: only %d reference fits", set.key, len(fits))
		}
		for name, want := range fits {
			spec := parseModelName(t, name)
			got, err := CJSGroups(set.ms, set.groups, spec.Phi, spec.P)
			if err != nil {
				t.Fatalf("%s %s: %v", set.key, name, err)
			}
			if math.Abs(got.LogLik-want.LogLik) > 1e-5 {
				t.Errorf("%s %s: lnL %.7f, scipy %.7f", set.key, name, got.LogLik, want.LogLik)
			}
			if got.Params != want.K {
				t.Errorf("%s %s: K %d, scipy %d", set.key, name, got.Params, want.K)
			}
			for pname, w := range want.Params {
				p := param(t, got, pname)
				if math.Abs(p.Estimate-w.Estimate) > 2e-4 {
					t.Errorf("%s %s %s: %.6f, scipy %.6f", set.key, name, pname, p.Estimate, w.Estimate)
				}
				// Both SEs come from finite-difference Hessians: agree to 1%.
				if math.Abs(p.SE-w.SE) > 0.01*w.SE+1e-5 {
					t.Errorf("%s %s SE(%s): %.6f, scipy %.6f", set.key, name, pname, p.SE, w.SE)
				}
			}
		}
	}
}

func parseModelName(t *testing.T, name string) ModelSpec {
	t.Helper()
	for _, a := range []Structure{Constant, Time, Group, GroupTime} {
		for _, b := range []Structure{Constant, Time, Group, GroupTime} {
			if ModelName(a, b) == name {
				return ModelSpec{a, b}
			}
		}
	}
	t.Fatalf("unknown model %q", name)
	return ModelSpec{}
}

// TestCJSIdentifiability checks the parameter count of phi(t) p(t):
// 2(T-1) - 1 = 11 for T = 7 (Lebreton et al. 1992, sec. on parameter
// counting; common practice), with the two factors of the last product
// flagged.
func TestCJSIdentifiability(t *testing.T) {
	r, err := CJS(dipper(t), Time, Time)
	if err != nil {
		t.Fatal(err)
	}
	if r.Params != 11 {
		t.Errorf("K = %d, want 11", r.Params)
	}
	for _, n := range []string{"phi[6]", "p[7]"} {
		if p := param(t, r, n); p.Identifiable {
			t.Errorf("%s reported as identifiable", n)
		}
	}
	if p := param(t, r, "phi[6]*p[7]"); !p.Identifiable || p.SE <= 0 {
		t.Errorf("product %+v", p)
	}
	for _, c := range []struct {
		phi, p Structure
		k      int
	}{
		{Constant, Constant, 2}, {Time, Constant, 7}, {Constant, Time, 7}, {Time, Time, 11},
	} {
		r, err := CJS(dipper(t), c.phi, c.p)
		if err != nil {
			t.Fatal(err)
		}
		if r.Params != c.k {
			t.Errorf("%s: K = %d, want %d", r.Method, r.Params, c.k)
		}
	}
}

// TestCJSGradient compares the analytic gradient with central differences
// at an arbitrary point, for a time model and a group model.
func TestCJSGradient(t *testing.T) {
	names, ms := readMArrayCSV(t, "testdata/groups-marray.csv")
	for _, spec := range []ModelSpec{{Time, Time}, {GroupTime, Constant}, {Group, Time}, {GroupTime, GroupTime}} {
		d := newDesign(names, ms[0].Occasions(), spec.Phi, spec.P)
		l := &cjsLik{d: d}
		for _, m := range ms {
			l.data = append(l.data, totals(m))
		}
		x := make([]float64, d.nCoef)
		for k := range x {
			x[k] = 0.3*math.Sin(float64(k)+1) + 0.2
		}
		g := make([]float64, len(x))
		l.grad(g, x)
		for k := range x {
			h := 1e-6
			xp := append([]float64(nil), x...)
			xm := append([]float64(nil), x...)
			xp[k] += h
			xm[k] -= h
			fd := (l.logLik(xp) - l.logLik(xm)) / (2 * h)
			if math.Abs(fd-g[k]) > 1e-4*math.Max(1, math.Abs(fd)) {
				t.Errorf("%s d/d%s: analytic %.6f, difference %.6f", spec, d.coefNames[k], g[k], fd)
			}
		}
	}
}

func TestCJSBadInput(t *testing.T) {
	zero := func(n int) [][]int {
		m := make([][]int, n)
		for i := range m {
			m[i] = make([]int, n)
		}
		return m
	}
	noRecap := MArray{Released: []int{10, 10, 10, 0}, M: zero(4)}
	noRelease := MArray{Released: []int{0, 0, 0, 0}, M: zero(4)}
	two := MArray{Released: []int{10, 0}, M: [][]int{{0, 4}, {0, 0}}}
	for _, c := range []struct {
		name string
		m    MArray
		want error
	}{
		{"no recaptures", noRecap, estimators.ErrNoRecaptures},
		{"never released", noRelease, estimators.ErrNoData},
		{"two occasions", two, estimators.ErrTooFewOccasions},
		{"empty", MArray{}, estimators.ErrNoData},
		{"bad shape", MArray{Released: []int{1, 2, 3}, M: zero(2)}, estimators.ErrInvalidInput},
	} {
		if _, err := CJS(c.m, Constant, Constant); !errors.Is(err, c.want) {
			t.Errorf("%s: err = %v, want %v", c.name, err, c.want)
		}
	}
	if _, err := CJS(dipper(t), Group, Constant); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("group structure on one m-array: err = %v", err)
	}
	if _, err := CJSGroups([]MArray{dipper(t), dipper(t)}, []string{"a"}, Group, Constant); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("names mismatch: err = %v", err)
	}
	short := MArray{Released: []int{10, 10, 0}, M: [][]int{{0, 3, 1}, {0, 0, 4}, {0, 0, 0}}}
	if _, err := CJSGroups([]MArray{dipper(t), short}, []string{"a", "b"}, Group, Constant); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("occasions mismatch: err = %v", err)
	}
	if _, err := ParseStructure("x"); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("ParseStructure: err = %v", err)
	}
}

// TestCJSBoundary: every animal released is caught on the next occasion,
// so p goes to 1; the fit must flag the boundary and stay free of NaN
// (the result must encode as JSON, which rejects NaN).
func TestCJSBoundary(t *testing.T) {
	m := MArray{Released: []int{20, 30, 30, 0}, M: [][]int{{0, 12, 0, 0}, {0, 0, 15, 0}, {0, 0, 0, 14}, {0, 0, 0, 0}}}
	for _, spec := range StandardModels(1) {
		r, err := CJS(m, spec.Phi, spec.P)
		if err != nil {
			t.Fatalf("%s: %v", spec, err)
		}
		if _, err := json.Marshal(r); err != nil {
			t.Errorf("%s: %v", spec, err)
		}
		if spec == (ModelSpec{Constant, Constant}) {
			p := param(t, r, "p")
			if !r.Boundary || p.SE != 0 || p.Kind != estimators.CINone || len(r.Warnings) == 0 {
				t.Errorf("%s: p = %+v not flagged at the boundary", spec, p)
			}
		}
	}
}

// TestCJSFromHistoriesLosses: animals lost on capture are left out of R,
// so flagging a loss changes the m-array and not only the counts.
func TestCJSFromHistoriesLosses(t *testing.T) {
	h := histories(t, "111", "110x", "101", "011", "111", "100")
	m, _, err := FromHistories(h)
	if err != nil {
		t.Fatal(err)
	}
	if m.Released[1] != 3 { // caught at 2: "111", "110x", "011", "111" less the loss
		t.Errorf("R2 = %d, want 3", m.Released[1])
	}
	if _, err := CJS(m, Constant, Constant); err != nil {
		t.Fatal(err)
	}
}
