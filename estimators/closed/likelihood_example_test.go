package closed_test

import (
	"fmt"
	"strings"

	"tagtally/estimators"
	"tagtally/estimators/closed"
)

// cottontailHistories lays out the cottontail capture frequencies
// (Edwards & Eberhardt 1967, as in testdata) as histories: f_k animals caught
// on the first k of 18 occasions. M0 and Mh use the frequencies only.
func cottontailHistories() *estimators.Histories {
	freq := []int{43, 16, 8, 6, 0, 2, 1} // f_1..f_7; none caught more often
	h := &estimators.Histories{}
	for k, fk := range freq {
		for a := 0; a < fk; a++ {
			row := make([]bool, 18)
			for j := 0; j <= k; j++ {
				row[j] = true
			}
			h.Caught = append(h.Caught, row)
		}
	}
	return h
}

func ExampleM0() {
	res, err := closed.M0(cottontailHistories())
	if err != nil {
		fmt.Println(err)
		return
	}
	p, _ := res.Param("p")
	fmt.Printf("%s: N = %.1f (SE %.1f), 95%% %s interval %.1f to %.1f; p = %.3f\n",
		res.Method, res.N.Estimate, res.N.SE, res.N.Kind, res.N.Low, res.N.High, p.Estimate)
	// Output:
	// M0: N = 96.3 (SE 6.9), 95% profile likelihood interval 85.2 to 112.7; p = 0.082
}

func ExampleMh() {
	res, err := closed.Mh(cottontailHistories())
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("%s: N = %.1f, K = %d, lnL = %.3f, interval from %.1f, open above: %v\n",
		res.Method, res.N.Estimate, res.Params, res.LogLik, res.N.Low, strings.Contains(strings.Join(res.Warnings, " "), "open above"))
	// Output:
	// Mh: N = 135.5, K = 4, lnL = -180.808, interval from 96.7, open above: true
}
