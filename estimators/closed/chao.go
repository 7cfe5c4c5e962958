package closed

import (
	"fmt"
	"math"

	"tagtally/estimators"
)

var chaoHeterogeneityAssumptions = []string{
	"the population is closed during the study",
	"each animal has its own capture probability (heterogeneity); the estimate is a lower bound for N when capture probabilities vary a lot",
	"animals are caught independently of each other; no behavioural response to capture",
}

// ChaoMh is Chao's (1987) lower-bound estimator of N under model Mh
// (capture probability varies among animals, constant over occasions),
// from the numbers of animals caught once (f1) and twice (f2):
//
//	N = S + f1²/(2 f2)
//	var = f2 [ (f1/f2)⁴/4 + (f1/f2)³ + (f1/f2)²/2 ]          (Chao 1987)
//
// with S the number of animals caught. When f2 = 0 the bias-corrected
// form N = S + f1(f1-1)/2 is used (the f1(f1-1)/(2(f2+1)) correction of
// Chao 2005, at f2 = 0) with its variance by the multinomial delta
// method, and a warning. The interval is log-normal (Chao 1987),
// never below S. f1 = 0 (every animal caught at least twice) gives N = S as
// a boundary estimate; f1 = S (no recaptures) an error wrapping
// estimators.ErrNoRecaptures.
func ChaoMh(f Frequencies) (*estimators.Result, error) {
	const name = "Chao Mh"
	if err := checkChao(name, f); err != nil {
		return nil, err
	}
	s := float64(f.Animals())
	f1, f2 := float64(f[0]), float64(f[1])
	res := &estimators.Result{
		Method:      name,
		Assumptions: append([]string(nil), chaoHeterogeneityAssumptions...),
		References: []string{
			"Chao, A. (1987). Biometrics 43:783-791.",
			"Chao, A. (2005). Species estimation and applications. Encyclopedia of Statistical Sciences, 2nd ed., Wiley.",
		},
	}
	var n, v float64
	switch {
	case f1 == 0:
		n, v = s, 0
	case f2 > 0:
		r := f1 / f2
		n = s + f1*f1/(2*f2)
		v = f2 * (r*r*r*r/4 + r*r*r + r*r/2)
	default:
		g := func(fk []float64) float64 {
			return freqSum(fk) + fk[0]*(fk[0]-1)/(2*(fk[1]+1))
		}
		n = g(freqFloats(f))
		v = frequencyDeltaVariance(g, f, n)
		res.Warnings = append(res.Warnings, "no animal was caught exactly twice: the bias-corrected form f1(f1-1)/2 is used")
	}
	return finishChao(res, f, n, v), nil
}

// ChaoMt is Chao's (1989) estimator for sparse data under model Mt
// (capture probability varies over occasions, the same for every animal):
//
//	N = S + ((T-1)/T) f1²/(2 f2)
//
// over T occasions; the factor (T-1)/T comes from the bound
// Σ_{j<k} p_j p_k <= ((T-1)/(2T)) (Σ p_j)². When f2 = 0 the bias-corrected
// form S + ((T-1)/T) f1(f1-1)/(2(f2+1)) is used. (Formulas from memory of
// Chao 1989; the bound above is derived here.) The variance is the
// multinomial delta-method variance (as in Chao 1987, 1989), the interval
// log-normal (Chao 1987). Degenerate cases as for ChaoMh.
func ChaoMt(f Frequencies) (*estimators.Result, error) {
	const name = "Chao Mt"
	if err := checkChao(name, f); err != nil {
		return nil, err
	}
	t := float64(f.Occasions())
	s := float64(f.Animals())
	res := &estimators.Result{
		Method: name,
		Assumptions: []string{
			"the population is closed during the study",
			"capture probability varies between occasions but is the same for every animal on an occasion (model Mt); designed for sparse data (low capture probabilities)",
			"no behavioural response to capture; animals caught independently",
		},
		References: []string{"Chao, A. (1989). Biometrics 45:427-438.", "Chao, A. (1987). Biometrics 43:783-791."},
	}
	g := func(fk []float64) float64 {
		return freqSum(fk) + (t-1)/t*fk[0]*fk[0]/(2*fk[1])
	}
	if f[1] == 0 {
		g = func(fk []float64) float64 {
			return freqSum(fk) + (t-1)/t*fk[0]*(fk[0]-1)/(2*(fk[1]+1))
		}
		res.Warnings = append(res.Warnings, "no animal was caught exactly twice: the bias-corrected form is used")
	}
	n := s
	v := 0.0
	if f[0] > 0 {
		n = g(freqFloats(f))
		v = frequencyDeltaVariance(g, f, n)
	}
	return finishChao(res, f, n, v), nil
}

// ChaoMth is the sample-coverage estimator of Chao, Lee & Jeng (1992) for
// model Mth (capture probability varies both among animals and over
// occasions):
//
//	C = 1 - f1 / Σ k f_k                         (estimated sample coverage)
//	N0 = S / C
//	γ² = max( N0 Σ k(k-1) f_k / (2 Σ_{j<l} n_j n_l) - 1, 0 )   (squared CV of the animals' capture probabilities)
//	N = S/C + (f1/C) γ²
//
// with n_j the number caught on occasion j. The variance is the delta
// method under the multinomial distribution of the capture histories
// (Chao et al. 1992), derivatives by central differences; the interval is
// log-normal (Chao 1987). Degenerate cases: no recaptures (C = 0) is an
// error wrapping estimators.ErrNoRecaptures; f1 = 0 gives N = S as a
// boundary estimate. A large γ² (above about 0.8) makes the estimate
// unstable; a warning says so.
func ChaoMth(h *estimators.Histories) (*estimators.Result, error) {
	const name = "Chao Mth (sample coverage)"
	f, err := FrequenciesFromHistories(h)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	if err := checkChao(name, f); err != nil {
		return nil, err
	}
	t := h.Occasions()
	// Distinct histories with their counts: the multinomial cells.
	type cell struct {
		row   []bool
		k     int
		count float64
	}
	index := map[string]int{}
	var cells []cell
	occ := make([]float64, t)
	for _, row := range h.Caught {
		key := make([]byte, t)
		k := 0
		for j, c := range row {
			key[j] = '0'
			if c {
				key[j] = '1'
				k++
				occ[j]++
			}
		}
		if i, ok := index[string(key)]; ok {
			cells[i].count++
			continue
		}
		index[string(key)] = len(cells)
		cells = append(cells, cell{row: row, k: k, count: 1})
	}
	// x holds f_1..f_T then n_1..n_T.
	g := func(x []float64) float64 {
		fk, nj := x[:t], x[t:]
		var s, caps, kk float64
		for i, v := range fk {
			k := float64(i + 1)
			s += v
			caps += k * v
			kk += k * (k - 1) * v
		}
		cov := 1 - fk[0]/caps
		var pairs, tot float64
		for _, v := range nj {
			pairs += tot * v
			tot += v
		}
		n0 := s / cov
		g2 := math.Max(n0*kk/(2*pairs)-1, 0)
		return n0 + fk[0]/cov*g2
	}
	x := append(freqFloats(f), occ...)
	res := &estimators.Result{
		Method: name,
		Assumptions: []string{
			"the population is closed during the study",
			"capture probability varies among animals and over occasions, as the product of an animal effect and an occasion effect (model Mth)",
			"no behavioural response to capture; animals caught independently",
		},
		References: []string{"Chao, A., Lee, S.-M. & Jeng, S.-L. (1992). Biometrics 48:201-216.", "Chao, A. (1987). Biometrics 43:783-791."},
	}
	s := float64(f.Animals())
	if f[0] == 0 {
		return finishChao(res, f, s, 0), nil
	}
	n := g(x)
	grad := make([]float64, len(x))
	for i := range x {
		hstep := 1e-4 * math.Max(1, math.Abs(x[i]))
		xp := append([]float64(nil), x...)
		xm := append([]float64(nil), x...)
		xp[i] += hstep
		xm[i] -= hstep
		grad[i] = (g(xp) - g(xm)) / (2 * hstep)
	}
	var sd2, sd float64
	for _, c := range cells {
		d := grad[c.k-1]
		for j, caught := range c.row {
			if caught {
				d += grad[t+j]
			}
		}
		sd2 += d * d * c.count
		sd += d * c.count
	}
	v := sd2 - sd*sd/n
	caps := float64(f.Captures())
	cov := 1 - float64(f[0])/caps
	res.Parameters = append(res.Parameters, estimators.Named{Name: "sample coverage", Value: estimators.Value{Estimate: cov}, Identifiable: true})
	n0 := s / cov
	if gamma2 := (n - n0) * cov / float64(f[0]); gamma2 >= 0 {
		res.Parameters = append(res.Parameters, estimators.Named{Name: "CV^2 of capture probabilities", Value: estimators.Value{Estimate: gamma2}, Identifiable: true})
		if gamma2 > 0.8 {
			res.Warnings = append(res.Warnings, fmt.Sprintf("capture probabilities vary strongly among animals (squared CV %.2f): the estimate is unstable", gamma2))
		}
	}
	return finishChao(res, f, n, v), nil
}

func checkChao(name string, f Frequencies) error {
	if err := f.Validate(); err != nil {
		return fmt.Errorf("%s: %w", name, err)
	}
	if f[0] == f.Animals() {
		return fmt.Errorf("%s: %w: every animal was caught exactly once", name, estimators.ErrNoRecaptures)
	}
	return nil
}

// finishChao fills N, SE, the log-normal interval and boundary flags.
func finishChao(res *estimators.Result, f Frequencies, n, v float64) *estimators.Result {
	s := float64(f.Animals())
	if v < 0 || math.IsNaN(v) {
		v = 0
	}
	if n <= s {
		n = s
		res.Boundary = true
		res.Warnings = append(res.Warnings, "no animal was caught exactly once: the estimate equals the number caught and has no measured uncertainty")
	}
	se := math.Sqrt(v)
	res.N = &estimators.Value{Estimate: n, SE: se, Interval: estimators.LogNormalIntervalN(n, se, f.Animals())}
	res.Parameters = append([]estimators.Named{
		{Name: "f1", Value: estimators.Value{Estimate: float64(f[0])}, Identifiable: true},
		{Name: "f2", Value: estimators.Value{Estimate: float64(f[1])}, Identifiable: true},
	}, res.Parameters...)
	return res
}

// frequencyDeltaVariance is the delta-method variance of an estimator
// N = g(f_1, ..., f_T) when the capture frequencies, with the unseen count
// N - S, are multinomial with N trials (Chao 1987):
//
//	var = Σ_k (∂g/∂f_k)² f_k - (Σ_k (∂g/∂f_k) f_k)² / N
//
// derivatives by central differences.
func frequencyDeltaVariance(g func([]float64) float64, f Frequencies, n float64) float64 {
	x := freqFloats(f)
	var sd2, sd float64
	for i := range x {
		if x[i] == 0 {
			continue
		}
		hstep := 1e-4 * math.Max(1, x[i])
		xp := append([]float64(nil), x...)
		xm := append([]float64(nil), x...)
		xp[i] += hstep
		xm[i] -= hstep
		d := (g(xp) - g(xm)) / (2 * hstep)
		sd2 += d * d * x[i]
		sd += d * x[i]
	}
	return sd2 - sd*sd/n
}

func freqFloats(f Frequencies) []float64 {
	x := make([]float64, len(f))
	for i, v := range f {
		x[i] = float64(v)
	}
	return x
}

func freqSum(x []float64) float64 {
	s := 0.0
	for _, v := range x {
		s += v
	}
	return s
}
