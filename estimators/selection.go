package estimators

import (
	"math"
	"sort"
)

// Ranked is one row of a model-selection table.
type Ranked struct {
	Result *Result `json:"result"`
	// Criterion is AICc, or QAICc when an overdispersion factor above 1 was
	// applied.
	Criterion float64 `json:"criterion"`
	Delta     float64 `json:"delta"`
	Weight    float64 `json:"weight"`
}

// Selection is a model-selection table sorted by the criterion, best first,
// with the model-averaged abundance where the models estimate N.
type Selection struct {
	// CriterionName is "AICc" or "QAICc".
	CriterionName string   `json:"criterion_name"`
	CHat          float64  `json:"c_hat"`
	Rows          []Ranked `json:"rows"`
	// AveragedN is the model-averaged N with the unconditional SE of
	// Burnham & Anderson (2002, eq. 4.9); nil when no model gives N.
	AveragedN *Value `json:"averaged_N,omitempty"`
	// Caught is the number of distinct animals caught, the floor for the
	// averaged N's log-normal interval (0 when unknown).
	Caught int `json:"caught,omitempty"`
}

// QAICc is AICc with the log-likelihood divided by the overdispersion factor
// c-hat and one extra parameter counted for estimating c-hat (Burnham &
// Anderson 2002, sec. 2.5). With cHat <= 1 it equals AICc.
func QAICc(logLik float64, k, n int, cHat float64) float64 {
	if cHat <= 1 {
		return AICc(logLik, k, n)
	}
	return AICc(logLik/cHat, k+1, n)
}

// Select ranks likelihood results by AICc (QAICc when cHat > 1), computes
// Akaike weights w_i = exp(-Δ_i/2) / Σ exp(-Δ_j/2) and, when the models
// estimate N, the model-averaged N
//
//	N̄ = Σ w_i N_i,  SE(N̄) = Σ w_i sqrt(var_i + (N_i - N̄)²)
//
// (Burnham & Anderson 2002, eqs. 4.1 and 4.9). Results without a likelihood
// or with an infinite criterion get weight 0 and sort last. caught, when
// positive, makes the averaged interval log-normal with that floor.
func Select(results []*Result, cHat float64, caught int) Selection {
	sel := Selection{CriterionName: "AICc", CHat: cHat, Caught: caught}
	if cHat > 1 {
		sel.CriterionName = "QAICc"
	}
	for _, r := range results {
		c := math.Inf(1)
		if r.HasLikelihood {
			c = QAICc(r.LogLik, r.Params, r.SampleSize, cHat)
		}
		sel.Rows = append(sel.Rows, Ranked{Result: r, Criterion: c})
	}
	sort.SliceStable(sel.Rows, func(i, j int) bool { return sel.Rows[i].Criterion < sel.Rows[j].Criterion })
	if len(sel.Rows) == 0 || math.IsInf(sel.Rows[0].Criterion, 1) {
		for i := range sel.Rows {
			sel.Rows[i].Delta = math.Inf(1)
		}
		return sel
	}
	best := sel.Rows[0].Criterion
	total := 0.0
	for i := range sel.Rows {
		sel.Rows[i].Delta = sel.Rows[i].Criterion - best
		if !math.IsInf(sel.Rows[i].Delta, 1) {
			sel.Rows[i].Weight = math.Exp(-sel.Rows[i].Delta / 2)
			total += sel.Rows[i].Weight
		}
	}
	var nBar, wN float64
	for i := range sel.Rows {
		sel.Rows[i].Weight /= total
		if r := sel.Rows[i].Result; r.N != nil && sel.Rows[i].Weight > 0 {
			nBar += sel.Rows[i].Weight * r.N.Estimate
			wN += sel.Rows[i].Weight
		}
	}
	if wN == 0 {
		return sel
	}
	// Renormalise over the models that give N.
	nBar /= wN
	se := 0.0
	for _, row := range sel.Rows {
		if r := row.Result; r.N != nil && row.Weight > 0 {
			d := r.N.Estimate - nBar
			se += row.Weight / wN * math.Sqrt(r.N.SE*r.N.SE+d*d)
		}
	}
	v := &Value{Estimate: nBar, SE: se}
	if caught > 0 {
		v.Interval = LogNormalIntervalN(nBar, se, caught)
	} else {
		v.Interval = NormalInterval(nBar, se)
	}
	sel.AveragedN = v
	return sel
}
