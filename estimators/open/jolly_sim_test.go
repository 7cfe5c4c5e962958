package open

import (
	"flag"
	"math"
	"math/rand/v2"
	"testing"

	"tagtally/estimators"
)

var longSim = flag.Bool("open.long", false, "run the long simulations (Jolly-Seber SEs over 2000 data sets)")

// openTruth is what a simulated study really held.
type openTruth struct {
	N []int // animals alive on each occasion
	B []int // animals that joined between i and i+1 and were alive at i+1
}

// simulateOpen simulates a Jolly-Seber population: n1 animals on occasion
// 1, joined[i] new animals arriving between occasions i and i+1, each
// caught with probability p on every occasion it is alive, lost on capture
// with probability loss, and surviving each interval with probability phi.
// Only animals caught at least once appear in the histories.
func simulateOpen(rng *rand.Rand, t, n1 int, joined []int, phi, p, loss float64) (*estimators.Histories, openTruth) {
	type animal struct {
		row   []bool
		alive bool
		lost  bool
	}
	var pop []*animal
	add := func(k int) {
		for ; k > 0; k-- {
			pop = append(pop, &animal{row: make([]bool, t), alive: true})
		}
	}
	add(n1)
	truth := openTruth{N: make([]int, t), B: make([]int, t)}
	for i := 0; i < t; i++ {
		for _, a := range pop {
			if !a.alive {
				continue
			}
			truth.N[i]++
			if rng.Float64() < p {
				a.row[i] = true
				if rng.Float64() < loss {
					a.alive, a.lost = false, true
				}
			}
		}
		if i == t-1 {
			break
		}
		for _, a := range pop {
			if a.alive && rng.Float64() >= phi {
				a.alive = false
			}
		}
		add(joined[i])
		truth.B[i] = joined[i]
	}
	h := &estimators.Histories{}
	for _, a := range pop {
		seen := false
		for _, c := range a.row {
			seen = seen || c
		}
		if seen {
			h.Caught = append(h.Caught, a.row)
			h.Removed = append(h.Removed, a.lost)
		}
	}
	return h, truth
}

// TestJollySeberSimulation checks the Jolly-Seber estimates and, above
// all, their standard-error formulas by simulation (fixed seed): over many
// simulated studies the mean estimate should be close to the truth and the
// mean reported SE close to the observed spread of the estimates. This is
// the independent check of the variance formulas, which were taken from
// Seber (1982) from memory.
func TestJollySeberSimulation(t *testing.T) {
	const (
		T    = 7
		phi  = 0.75
		p    = 0.45
		loss = 0.02
		occ  = 3 // 0-based occasion 4: N, phi, B and p all exist
	)
	reps := 200
	if *longSim {
		reps = 2000
	}
	rng := rand.New(rand.NewPCG(20261202, 4))
	joined := []int{250, 250, 250, 250, 250, 250}
	type acc struct{ sum, sumSq, seSum float64 }
	var aN, aPhi, aB, aP acc
	add := func(a *acc, err, se float64) {
		a.sum += err
		a.sumSq += err * err
		a.seSum += se
	}
	for r := 0; r < reps; r++ {
		h, truth := simulateOpen(rng, T, 1000, joined, phi, p, loss)
		_, s, err := FromHistories(h)
		if err != nil {
			t.Fatal(err)
		}
		res, err := JollySeber(s)
		if err != nil {
			t.Fatal(err)
		}
		o := res.Occasions[occ]
		if o.N == nil || o.Phi == nil || o.B == nil || o.P == nil || o.N.SE == 0 || o.B.SE == 0 {
			t.Fatalf("rep %d: missing estimates %+v", r, o)
		}
		// N and B: error against the realised values (their SEs are
		// conditional on them); phi and p against the parameters.
		add(&aN, o.N.Estimate-float64(truth.N[occ]), o.N.SE)
		add(&aB, o.B.Estimate-float64(truth.B[occ]), o.B.SE)
		add(&aPhi, o.Phi.Estimate-phi, o.Phi.SE)
		add(&aP, o.P.Estimate-p, o.P.SE)
	}
	for _, c := range []struct {
		what string
		a    acc
		ref  float64 // scale for the bias check
	}{
		{"N", aN, 1500}, {"B", aB, 250}, {"phi", aPhi, phi}, {"p", aP, p},
	} {
		n := float64(reps)
		bias := c.a.sum / n
		sd := math.Sqrt(c.a.sumSq/n - bias*bias)
		meanSE := c.a.seSum / n
		t.Logf("%s: relative bias %.4f, SD of estimates %.4g, mean SE %.4g (ratio %.3f), %d data sets", c.what, bias/c.ref, sd, meanSE, meanSE/sd, reps)
		// Bias within 3% of the scale; the mean SE within 20% of the
		// observed SD (the SD itself is known to about ±5% from 200 sets).
		if math.Abs(bias) > 0.03*c.ref {
			t.Errorf("%s: bias %.4g", c.what, bias)
		}
		if r := meanSE / sd; r < 0.8 || r > 1.2 {
			t.Errorf("%s: mean SE / SD = %.3f", c.what, r)
		}
	}
}

// TestCJSSimulation: phi(.) p(.) recovers the phi and p of a large
// simulated study (fixed seed), and its logit-scale 95% intervals cover
// the truth at about the nominal rate over many smaller ones.
func TestCJSSimulation(t *testing.T) {
	const phi, p = 0.68, 0.42
	rng := rand.New(rand.NewPCG(7, 11))
	h, _ := simulateOpen(rng, 10, 20000, []int{8000, 8000, 8000, 8000, 8000, 8000, 8000, 8000, 8000}, phi, p, 0.01)
	m, _, err := FromHistories(h)
	if err != nil {
		t.Fatal(err)
	}
	r, err := CJS(m, Constant, Constant)
	if err != nil {
		t.Fatal(err)
	}
	gotPhi, gotP := param(t, r, "phi"), param(t, r, "p")
	t.Logf("large study, %d animals: phi %.4f (SE %.4f), p %.4f (SE %.4f)", len(h.Caught), gotPhi.Estimate, gotPhi.SE, gotP.Estimate, gotP.SE)
	// Tolerance 0.01, about four SEs at this size.
	if math.Abs(gotPhi.Estimate-phi) > 0.01 || math.Abs(gotP.Estimate-p) > 0.01 {
		t.Errorf("phi %.4f p %.4f, truth %.2f %.2f", gotPhi.Estimate, gotP.Estimate, phi, p)
	}

	// 1000 small studies take well under a second, so the coverage is
	// always measured on 1000.
	const runs = 1000
	coverPhi, coverP := 0, 0
	for k := 0; k < runs; k++ {
		h, _ := simulateOpen(rng, 6, 150, []int{80, 80, 80, 80, 80}, phi, p, 0)
		m, _, err := FromHistories(h)
		if err != nil {
			t.Fatal(err)
		}
		r, err := CJS(m, Constant, Constant)
		if err != nil {
			t.Fatal(err)
		}
		if v := param(t, r, "phi"); v.Low <= phi && phi <= v.High {
			coverPhi++
		}
		if v := param(t, r, "p"); v.Low <= p && p <= v.High {
			coverP++
		}
	}
	cp, cq := float64(coverPhi)/float64(runs), float64(coverP)/float64(runs)
	t.Logf("95%% CI coverage over %d simulated studies (6 occasions, about 330 animals): phi %.3f, p %.3f", runs, cp, cq)
	// With 1000 runs the binomial SD of a true 95% coverage is 0.007: 0.92
	// is more than four SDs below, and 0.98 more than four above (intervals
	// much too wide would be a fault too).
	if cp < 0.92 || cq < 0.92 || cp > 0.98 || cq > 0.98 {
		t.Errorf("coverage phi %.3f p %.3f", cp, cq)
	}
}
