// Package counterfactual estimates, from impressions logged while
// probabilistic interleaving compared two rankers, how a comparison of one
// of them with a new candidate ranker would have come out, without showing
// the candidate to anyone.
//
// The method is Hofmann, Whiteson & de Rijke, "Estimating interleaved
// comparison outcomes from historical click data" (CIKM 2012), analysed in
// "Fidelity, soundness, and efficiency of interleaved comparison methods"
// (ACM TOIS 31(4), 2013, the importance-sampling extension of probabilistic
// interleave). Probabilistic interleaving shows every list that can be built
// from two rankings' items with a known, non-zero probability, so clicks
// logged on a list l under the source comparison S can stand for clicks
// under a target comparison T, reweighted by
//
//	w(l) = P_T(l) / P_S(l)
//
// (importance sampling), provided users' clicks depend on the list they
// see and not on which ranker contributed each slot, which they cannot
// see. Each impression's outcome under T is marginalised over the team
// assignments that could have produced l under T, as in probabilistic
// interleaving's own credit (merge.Probabilistic.Credit): o_T(l, c) is
// E_T[o | l, c]. Then
//
//	E_S[w(l) o_T(l, c)] = E_T[o]   and   E_S[w(l) 1{c}] = P_T(c)
//
// exactly, for every click model (Weigh's tests enumerate every list and
// click set of small cases to show it). riffle's Delta counts only
// impressions with feedback, so the estimate is their ratio,
//
//	Delta = sum w o_T / (2 sum w)   over impressions with clicks,
//
// a ratio (self-normalised) estimator: consistent, with a bias of order
// 1/n, and its variance is the linearised (delta-method) ratio variance,
// clustered by user (Cochran, Sampling Techniques, 1977, section 6.3).
//
// The source's per-slot draw probabilities are logged by the sidecar
// (store.Impression's slots carry PA and PB); the target's come from the
// logged ranker's PA or PB and the candidate's ranking, replayed on the
// same request. Both factorise over slots because a draw removes the item
// from both rankings whichever drew it: P(l) = prod_i (p_1,i + p_2,i) / 2,
// or the one ranking's p once the other has nothing left to draw.
package counterfactual
