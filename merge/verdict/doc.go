// Package verdict turns an experiment's outcome counts into a decision a
// practitioner can defend: the preference statistic Delta with intervals,
// an exact sign test, an always-valid sequential test, non-inferiority and
// equivalence against a margin, variance clustered by user, the impressions
// still needed and when they will have arrived.
//
// Everything here is a pure function of counts, without I/O, clocks or
// randomness, and safe for concurrent use.
//
// # Methods
//
// Outcomes: an impression with feedback is a challenger win (W), an
// incumbent win (L, for loss) or a tie (T); n = W + L + T.
//
// Delta (Chapelle, Joachims, Radlinski & Yue, "Large-scale validation and
// analysis of interleaved search evaluation", ACM TOIS 30(1), 2012) is
//
//	Delta = (W + T/2) / n - 0.5
//
// positive when the challenger is preferred. Its fixed-sample interval
// (Status.CI) is a score interval for the preference share R = Delta + 0.5:
// the per-impression variance under a hypothesised share r is
// r(1-r) - tau/4, with the tie share tau estimated under r (a restricted
// maximum-likelihood estimate, as in Miettinen & Nurminen 1985), times the
// design effect; a continuity correction of 1/(4n) keeps its coverage at
// or above 1 - alpha - 0.02 from n = 10 on. It never collapses to a point:
// all ties give an interval around 0.
//
// Clustered variance: impressions of one user are not independent. The
// package uses the delta method (linearisation of the ratio estimator
// R = sum(y_u) / sum(n_u) over users u, the cluster-robust "sandwich"
// variance; Cochran, Sampling Techniques, 3rd ed. 1977, section 6.3).
// The design effect is that variance over the variance computed as if
// every impression were independent (Kish, Survey Sampling, 1965).
// Impressions without a user key count as users of their own. Where it
// cannot be estimated (fewer than two users, or users who all share one
// win share) it is the largest it can be, sum n_u^2 / sum n_u, so it is
// never 0; where it enters a fixed-sample calculation it is floored at 1.
//
// Win share: p = W / (W + L), ties set aside. Its Wilson score interval
// (on counts over the design effect) and the exact two-sided binomial sign
// test (Status.SignTest, computed on users: each user counts once for the
// side that won more of their impressions) are fixed-sample methods, valid
// at one pre-planned look only.
//
// # Always-valid confidence sequence
//
// The verdict rests on one confidence sequence for Delta at level alpha.
// For a hypothesised share r, let S(r) = sum_u (y_u - r n_u), summed over
// users, and V(r) = sum_u (y_u - r n_u)^2, or the same sum over single
// impressions if that is larger. When users are independent and each
// user's contribution is symmetric about 0 under r, exp(lambda S -
// lambda^2 V / 2) is a supermartingale for every lambda (de la Peña,
// "A general class of exponential inequalities for martingales and
// ratios", Annals of Probability 27, 1999), and so is its mixture over
// lambda ~ N(0, rho2):
//
//	E(r) = exp(rho2 S^2 / (2 (1 + rho2 V))) / sqrt(1 + rho2 V)
//
// (the normal mixture of Robbins 1970 in the form of Howard, Ramdas,
// McAuliffe & Sekhon, "Time-uniform, nonparametric, nonasymptotic
// confidence sequences", Annals of Statistics 49(2), 2021). By Ville's
// inequality E(1/2) ever reaches 1/alpha under no difference with
// probability at most alpha, at looks as frequent as anyone likes. The
// user is the unit, so one heavy user counts once: S^2 <= k V with k
// users (Cauchy-Schwarz), so E < exp(k/2), and no verdict is possible with
// k <= 2 log(1/alpha) users (5 at alpha 0.05) whatever their impressions. Where symmetry fails (at
// r far from 1/2, or heavy users leaning one way) the guarantee is
// asymptotic, as for confidence sequences built on a cluster-robust
// variance (Waudby-Smith, Arbour, Sinha, Kennedy & Ramdas, "Time-uniform
// central limit theory and asymptotic confidence sequences", 2021). rho2
// is tuned (Howard et al. 2021, section 3.5) to be tightest when V reaches
// a quarter of the fixed-sample size for the MDE. The sequence at a look
// is the hull of the r in [0, 1] with E(r) < 1/alpha, found on a grid that
// includes 1/2 and refined by bisection; the look's p-value is the
// smallest alpha at which that hull excludes 1/2, so p <= alpha exactly
// when it excludes 0 in Delta.
//
// Running state: the running intersection of a confidence sequence is
// itself one (Howard et al. 2021), so Status.CSDelta is the intersection
// over looks and Status.PValue the least p-value over looks: the interval
// only shrinks, the p-value only falls. The caller carries the state
// (Status.Running into the next Input.Running; the store persists it).
// Status.Current shows the look on its own.
//
// # Verdict
//
// The rule on the running interval [lo, hi] for Delta and margin m, in
// this precedence:
//
//  1. lo > 0: challenger-better;
//  2. hi < 0: incumbent-better;
//  3. m > 0 and -m < lo and hi < m: on-par;
//  4. otherwise undecided.
//
// The first look at which the rule is not undecided is recorded
// (Status.Decided) and the verdict is kept from then on, so no verdict
// ever changes once reached; Status.Current.Verdict says what the rule
// says now. Status.NonInferior ("on par or better") says lo is above -m.
// Status.Reason says the same in words.
//
// # Needed and ETA
//
// Status.NeededFixed is the classical one-sample proportion sample size for
// p = 0.5 against p = 0.5 + MDE at two-sided alpha and the given power;
// Status.Needed is the approximate size the always-valid sequence needs for
// that power (see SequentialSampleSize), which is what the verdict waits for. Both
// assume no ties (ties only reduce them), are multiplied by the design effect,
// and count the impressions with feedback still to come: zero once the
// verdict is decided. Status.ETA is Needed over the recent rate of
// interleaved impressions times the share of finalised impressions that had
// feedback; it is null when that rate is unknown.
package verdict
