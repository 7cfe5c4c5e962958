package closed

import (
	"encoding/json"
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/diff/fd"

	"tagtally/estimators"
)

// allModels lists every exported likelihood model, Huggins with one
// covariate ("mass") standing in for its family.
var allModels = []struct {
	name string
	fit  func(*estimators.Histories) (*estimators.Result, error)
}{
	{"M0", M0}, {"Mt", Mt}, {"Mb", Mb}, {"Mh", Mh}, {"Mth", Mth}, {"Mtb", Mtb},
	{"Huggins", func(h *estimators.Histories) (*estimators.Result, error) { return Huggins(h, []string{"mass"}, false) }},
}

func rows(hist ...string) *estimators.Histories {
	h := &estimators.Histories{Covariates: map[string][]float64{"mass": {}}}
	for i, s := range hist {
		r, err := estimators.ParseHistory(s)
		if err != nil {
			panic(err)
		}
		h.Caught = append(h.Caught, r)
		h.Covariates["mass"] = append(h.Covariates["mass"], 100+float64(i%5))
	}
	return h
}

// TestBadInput: each kind of unusable data gives the documented sentinel,
// for every model, and never a panic.
func TestBadInput(t *testing.T) {
	cases := []struct {
		name string
		h    *estimators.Histories
		want error
	}{
		{"nil", nil, estimators.ErrNoData},
		{"no animals", &estimators.Histories{}, estimators.ErrNoData},
		{"ragged rows", &estimators.Histories{Caught: [][]bool{{true, false, true, true}, {true, true}}}, estimators.ErrInvalidInput},
		{"never caught", rows("11000", "00000"), estimators.ErrInvalidInput},
		{"one occasion", rows("1", "1", "1"), estimators.ErrTooFewOccasions},
		{"no recaptures", rows("10000", "01000", "00100", "00010", "00001", "10000"), estimators.ErrNoRecaptures},
	}
	for _, c := range cases {
		for _, m := range allModels {
			t.Run(c.name+"/"+m.name, func(t *testing.T) {
				res, err := m.fit(c.h)
				if !errors.Is(err, c.want) {
					t.Fatalf("got %v (result %v), want %v", err, res, c.want)
				}
			})
		}
	}
}

// TestTooFewOccasionsPerModel: Mh needs 4 occasions, Mth and Mtb 3.
func TestTooFewOccasionsPerModel(t *testing.T) {
	h3 := rows("110", "011", "101", "100", "010", "111", "001")
	for _, f := range []func(*estimators.Histories) (*estimators.Result, error){Mh} {
		if _, err := f(h3); !errors.Is(err, estimators.ErrTooFewOccasions) {
			t.Errorf("Mh on 3 occasions: %v", err)
		}
	}
	h2 := rows("11", "01", "10", "11", "10")
	for name, f := range map[string]func(*estimators.Histories) (*estimators.Result, error){"Mth": Mth, "Mtb": Mtb} {
		if _, err := f(h2); !errors.Is(err, estimators.ErrTooFewOccasions) {
			t.Errorf("%s on 2 occasions: %v", name, err)
		}
	}
}

// TestEveryoneCaughtEveryTime: the boundary estimate N = Mt1, flagged.
func TestEveryoneCaughtEveryTime(t *testing.T) {
	h := rows("1111", "1111", "1111", "1111", "1111")
	for _, m := range allModels {
		res, err := m.fit(h)
		if err != nil {
			t.Fatalf("%s: %v", m.name, err)
		}
		if res.N.Estimate != 5 || res.N.Low != 5 || res.N.High != 5 || res.N.SE != 0 || !res.Boundary || len(res.Warnings) == 0 {
			t.Errorf("%s: %+v boundary=%v warnings=%v", m.name, res.N, res.Boundary, res.Warnings)
		}
		if _, err := json.Marshal(res); err != nil {
			t.Errorf("%s: %v", m.name, err)
		}
	}
}

// TestMbUnbounded: when first captures rise over the occasions, Mb's
// likelihood increases without bound in N and the fit must say so instead
// of returning a huge number.
func TestMbUnbounded(t *testing.T) {
	var hist []string
	add := func(s string, n int) {
		for i := 0; i < n; i++ {
			hist = append(hist, s)
		}
	}
	// First captures 2, 4, 8, 16 on occasions 1-4, a few recaptures.
	add("1100", 1)
	add("1000", 1)
	add("0110", 2)
	add("0100", 2)
	add("0011", 3)
	add("0010", 5)
	add("0001", 16)
	_, err := Mb(rows(hist...))
	if !errors.Is(err, estimators.ErrNotConverged) {
		t.Fatalf("got %v, want ErrNotConverged", err)
	}
}

// TestHugginsCovariateErrors: bad covariates are named in a clear error.
func TestHugginsCovariateErrors(t *testing.T) {
	base := func() *estimators.Histories { return rows("1100", "0110", "1010", "0001", "1001", "0111") }
	h := base()
	if _, err := Huggins(h, []string{"length"}, false); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("missing covariate: %v", err)
	}
	h = base()
	h.Covariates["mass"][2] = math.NaN()
	if _, err := Huggins(h, []string{"mass"}, false); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("NaN covariate: %v", err)
	}
	h = base()
	h.Covariates["flat"] = []float64{1, 1, 1, 1, 1, 1}
	if _, err := Huggins(h, []string{"flat"}, false); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("constant covariate: %v", err)
	}
	if _, err := Huggins(base(), []string{"mass", "mass"}, false); !errors.Is(err, estimators.ErrInvalidInput) {
		t.Errorf("repeated covariate: %v", err)
	}
	res, err := Huggins(base(), nil, true)
	if err != nil || res.Method != "Huggins p(t)" || res.Params != 4 {
		t.Errorf("time-only model: %v %+v", err, res)
	}
}

// TestProperties fits every model to many small simulated populations
// (fixed seed) and checks what must hold whatever the data: either a
// wrapped sentinel error or an estimate at least Mt1 inside an interval
// whose lower end is at least Mt1, finite numbers throughout (the result
// must encode as JSON, which rejects NaN and ±Inf), and K and AICc filled.
func TestProperties(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 7))
	sentinels := []error{estimators.ErrNoRecaptures, estimators.ErrNotConverged, estimators.ErrTooFewOccasions}
	for r := 0; r < 40; r++ {
		n := 10 + rng.IntN(60)
		occ := 4 + rng.IntN(4)
		base := 0.05 + 0.5*rng.Float64()
		h := simulate(rng, n, occ, func(i, j int, seen bool) float64 {
			p := base * (0.5 + float64(i%3)/2)
			if seen && r%2 == 0 {
				p = math.Min(0.95, p*1.5)
			}
			return p
		}, map[string]func(int) float64{"mass": func(i int) float64 { return 90 + float64((i*37)%23) }})
		if h.Animals() == 0 {
			continue
		}
		if r%3 == 0 {
			h.Removed = make([]bool, h.Animals())
			h.Removed[0] = true
		}
		for _, m := range allModels {
			res, err := m.fit(h)
			if err != nil {
				known := false
				for _, s := range sentinels {
					known = known || errors.Is(err, s)
				}
				if !known {
					t.Errorf("replicate %d %s: unexpected error %v", r, m.name, err)
				}
				continue
			}
			mt1 := float64(h.Animals())
			v := res.N
			if v.Estimate < mt1 || v.Low < mt1-1e-9 || v.Low > v.Estimate+1e-6 || v.High < v.Estimate-1e-6 || v.SE < 0 {
				t.Errorf("replicate %d %s: Mt1 %v, N %+v", r, m.name, mt1, v)
			}
			if _, err := json.Marshal(res); err != nil {
				t.Errorf("replicate %d %s: %v", r, m.name, err)
			}
			if res.Params == 0 || res.SampleSize != h.Animals() || !res.HasLikelihood || len(res.Assumptions) == 0 || len(res.References) == 0 {
				t.Errorf("replicate %d %s: incomplete result %+v", r, m.name, res)
			}
		}
	}
}

// TestAnalyticGradients compares the analytic gradients of Mth, Mtb and Huggins
// with central differences at arbitrary points, with losses on capture and
// time effects.
func TestAnalyticGradients(t *testing.T) {
	h := readLikelihoodHistories(t, true)
	m, _, err := mthModel(h)
	if err != nil {
		t.Fatal(err)
	}
	occ := h.Occasions()
	x := []float64{math.Log(25)}
	for j := 0; j < occ; j++ {
		x = append(x, -1.5+0.2*float64(j%3))
	}
	x = append(x, 1.3, -0.4)
	checkGradient(t, "Mth", m.ll, m.grad, x)
	mtb, _, err := mtbModel(h)
	if err != nil {
		t.Fatal(err)
	}
	checkGradient(t, "Mtb", mtb.ll, mtb.grad, append(x[:occ+1:occ+1], 0.7))

	// Huggins, at a point away from the optimum (standardised covariates).
	ev := hugginsTestEval(t, h, []string{"male", "mass"}, true)
	y := []float64{-0.8, 0.3, -0.2}
	for j := 1; j < occ; j++ {
		y = append(y, 0.1*float64(j%4)-0.15)
	}
	checkGradient(t, "Huggins", ev.ll, ev.grad, y)
	ev = hugginsTestEval(t, h, []string{"male", "mass"}, false)
	checkGradient(t, "Huggins without time effects", ev.ll, ev.grad, y[:3])
}

func checkGradient(t *testing.T, name string, f func([]float64) float64, grad func(g, x []float64), x []float64) {
	t.Helper()
	g := make([]float64, len(x))
	grad(g, x)
	want := make([]float64, len(x))
	fd.Gradient(want, f, x, &fd.Settings{Formula: fd.Central, Step: 1e-6})
	for i := range g {
		if math.Abs(g[i]-want[i]) > 1e-5*(1+math.Abs(want[i])) {
			t.Errorf("%s: gradient[%d] = %.8g, finite differences %.8g", name, i, g[i], want[i])
		}
	}
}

func hugginsTestEval(t *testing.T, h *estimators.Histories, covariates []string, time bool) *hugginsEval {
	t.Helper()
	ev, _, _, _, err := newHugginsEval("Huggins", h, covariates, time)
	if err != nil {
		t.Fatal(err)
	}
	return ev
}

// TestProbabilityNames: only probabilities are checked against the edges
// of (0, 1); logit-scale effects may take any value.
func TestProbabilityNames(t *testing.T) {
	for name, want := range map[string]bool{
		"p": true, "c": true, "p[3]": true, "c[2]": true,
		"p(class 1, less catchable)": true, "p[1](class 2, more catchable)": true,
		"proportion in class 1":                                      true,
		"class difference δ (logit scale)":                           false,
		"behaviour effect (logit scale, recapture vs first capture)": false,
		"intercept (logit scale)":                                    false,
	} {
		if got := isProbabilityName(name); got != want {
			t.Errorf("isProbabilityName(%q) = %v", name, got)
		}
	}
}
