// Package open holds the open-population estimators of tagtally: models
// for studies long enough that animals are born, die, arrive and leave
// between sampling occasions.
//
// The parts fit together as follows.
//
//   - MArray and Summary are the sufficient statistics most open models
//     work from: the m-array (how many of the animals released on occasion
//     i were next caught on occasion j) and, per occasion, the numbers
//     caught, marked, released, recaptured later and "known alive but
//     missed" (z). FromHistories builds both from a capture-history matrix
//     and honours losses on capture: an animal that died or was removed
//     when caught is counted as caught but not as released.
//   - JollySeber gives the closed-form Jolly-Seber estimates (Jolly 1965;
//     Seber 1965) in their bias-adjusted forms (Seber 1982; Pollock et
//     al. 1990) of marked animals at risk, abundance, survival, recruits
//     and capture probability per occasion, with standard errors.
//     JollySeberUnadjusted gives Jolly's original estimates without the
//     small-sample adjustment, the form printed in the older literature,
//     for comparison with it.
//   - CJS and CJSGroups fit Cormack-Jolly-Seber models by maximum
//     likelihood from one m-array per group, so the cost depends on the
//     number of occasions and not on the number of animals. CJSTable fits
//     a set of them, ranks them by AICc (QAICc when an overdispersion
//     factor is given) and model-averages survival and capture
//     probability.
//
// Goodness of fit, Jolly-Seber by maximum likelihood and the robust design
// live in this package too and take the same MArray and Summary inputs.
//
// Caveats. Every estimate here assumes that marks are not lost or
// misread, that every marked animal alive at an occasion has the same
// capture probability and the same chance of surviving to the next
// occasion, and that emigration is permanent (survival is "apparent":
// death and permanent departure cannot be told apart). Jolly-Seber
// abundance and recruits also assume that marked and unmarked animals are
// equally catchable. Handling wild animals needs the permits,
// animal-welfare approval and handling training required where the work
// is done; these estimates do not replace local rules or licensed
// practice.
package open
