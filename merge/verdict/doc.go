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
// positive when the challenger is preferred. Its interval (Status.CI) is a
// Wilson-type score interval (Wilson, JASA 22, 1927) for the preference
// share R = Delta + 0.5: the per-impression variance under a hypothesised
// share r, with ties held at their observed share t, is r(1-r) - t/4, and is
// multiplied by the design effect so that it is the variance clustered by
// user. With no ties and no clustering it is exactly Wilson's interval.
//
// Clustered variance: impressions of one user are not independent. The
// package uses the delta method (linearisation of the ratio estimator
// R = sum(y_u) / sum(n_u) over users u, the cluster-robust "sandwich"
// variance; Cochran, Sampling Techniques, 3rd ed. 1977, section 6.3)
// rather than a cluster bootstrap, because it is a deterministic function
// of the per-user sums, needs no random numbers, and costs one pass over
// the users however many impressions there are. The design effect is that
// variance over the variance computed as if every impression were
// independent (Kish, Survey Sampling, 1965). Impressions without a user key
// count as users of their own. Where a design effect enters a
// calculation it is floored at 1, so that no interval is narrower than the
// one for independent impressions.
//
// Win share: p = W / (W + L), ties set aside, the challenger's share of the
// impressions one side won. Delta = 0 exactly when p = 0.5. Its Wilson score
// interval and the exact two-sided binomial sign test (Status.SignTest) are
// fixed-sample methods: valid at one pre-planned look only. The sign test
// uses the raw counts; the Wilson interval uses effective counts (counts
// over the design effect).
//
// Always-valid test: a mixture sequential probability ratio test for p
// against p = 0.5 (Robbins, "Statistical methods related to the law of the
// iterated logarithm", Ann. Math. Statist. 41, 1970; Johari, Pekelis &
// Walsh, "Always valid inference: bringing sequential analysis to A/B
// testing", 2017, arXiv:1512.04922). With a Beta(a, a) mixture over p the
// likelihood ratio has the closed form
//
//	Lambda = B(a + W, a + L) / B(a, a) / 0.5^(W + L)
//
// and Status.PValue = min(1, 1/Lambda). By Ville's inequality
// P(Lambda ever reaches 1/alpha | p = 0.5) <= alpha, so the p-value may be
// watched after every impression without inflating false positives. (The
// running minimum of these p-values is the monotone version; from counts
// alone riffle reports the current one, with the same guarantee that the
// chance of it ever dipping below alpha is at most alpha.) The mixture's a
// is chosen from the minimum detectable effect: the prior standard
// deviation of p equals MDE, so the test is most sensitive to effects of
// that size (Johari et al. advise a mixture on the scale of the effects
// expected). The confidence sequence (Status.CS) is the set of p0 whose
// mixture likelihood ratio against p0 stays below 1/alpha; it covers the
// true p at all times at once with probability 1 - alpha. Under clustering
// the counts enter as effective counts W/deff, L/deff.
//
// Delta's always-valid interval (Status.CSDelta) combines the confidence
// sequence for p and one for the share of decisive impressions q = 1 - t
// (uniform mixture), each at alpha/2, through Delta = q (p - 0.5).
//
// # Verdict
//
// The verdict is decided by the always-valid methods and the margin m:
//
//  1. no impression with feedback: undecided;
//  2. CSDelta lies inside (-m, +m): on-par (possible only when m > 0);
//  3. PValue < alpha and W > L: challenger-better;
//  4. PValue < alpha and L > W: incumbent-better;
//  5. otherwise undecided.
//
// Status.NonInferior ("on par or better") says the lower end of CSDelta is
// above -m. Status.Reason says the same in words.
//
// # Needed and ETA
//
// Status.NeededFixed is the classical one-sample proportion sample size for
// p = 0.5 against p = 0.5 + MDE at two-sided alpha and the given power;
// Status.Needed is the approximate size the always-valid test needs for that
// power (see SequentialSampleSize), which is what the verdict waits for. Both
// assume no ties (ties only reduce them), are multiplied by the design effect,
// and count the impressions with feedback still to come: zero once the
// verdict is decided. Status.ETA is Needed over the recent rate of
// interleaved impressions times the share of finalised impressions that had
// feedback; it is null when that rate is unknown.
package verdict
