package proxy

import (
	"bytes"
	"context"
	"io"
	"net/http"
	"time"

	"riffle/merge"
	"riffle/store"
)

// serveRoute handles one request on a configured route: admit it to the
// ramp or not, fan out, merge, respond, record.
func (rt *runtime) serveRoute(w http.ResponseWriter, r *http.Request, ro *route) {
	s := rt.srv
	x := s.getExchange()
	defer s.putExchange(x)
	x.start = s.now()
	x.id = store.NewID(x.start)
	w.Header()[ImpressionHeader] = []string{x.id.String()}
	o, why := rt.handle(w, r, ro, x)
	ro.m.count(o, why)
	ro.m.duration.Observe(s.now().Sub(x.start).Seconds())
}

func (rt *runtime) handle(w http.ResponseWriter, r *http.Request, ro *route, x *exchange) (outcome, reason) {
	body, why := readRequest(r, x, rt.maxBody)
	if why != reasonNone {
		writeRequestError(w, why, rt.maxBody)
		return outFailed, why
	}
	key := rt.user.key(r, body)
	x.user = store.HashUser(key)
	ramp, leftOut := rt.rampAt(x.start)
	b := idBucket(x.id)
	if key != "" {
		b = bucket(rt.experiment, key)
	}
	if b >= ramp {
		return rt.incumbentAlone(w, r, ro, x, body, leftOut)
	}
	return rt.interleave(w, r, ro, x, body)
}

// incumbentAlone serves a request outside the ramp: the challenger is not
// called.
func (rt *runtime) incumbentAlone(w http.ResponseWriter, r *http.Request, ro *route, x *exchange, body []byte, why reason) (outcome, reason) {
	ctx, cancel := context.WithTimeout(r.Context(), rt.inc.timeout)
	rt.srv.fetch(ctx, rt.inc, &ro.adapter, r, outboundHeader(r, rt.srv.pseudonym), body, &x.inc)
	cancel()
	if incumbentFailed(&x.inc) {
		return rt.incumbentFailure(w, x, false)
	}
	return rt.serveIncumbent(w, x, why)
}

// interleave calls both backends concurrently: the challenger on a
// goroutine of its own, the incumbent on the request's. The wait for the
// challenger is bounded by its deadline, which its context enforces on
// the dial, the exchange and the body read alike.
func (rt *runtime) interleave(w http.ResponseWriter, r *http.Request, ro *route, x *exchange, body []byte) (outcome, reason) {
	x.kept = rt.keep.of(r, ro.path, body)
	h := outboundHeader(r, rt.srv.pseudonym)
	cctx, ccancel := context.WithTimeout(r.Context(), rt.chal.timeout)
	defer ccancel()
	go rt.challenge(cctx, ro, r, h, body, x)
	ictx, icancel := context.WithTimeout(r.Context(), rt.inc.timeout)
	rt.srv.fetch(ictx, rt.inc, &ro.adapter, r, h, body, &x.inc)
	icancel()
	if incumbentFailed(&x.inc) && !rt.serveChallenger {
		ccancel() // its answer cannot be used: stop waiting for it
	}
	<-x.done
	return rt.decide(w, ro, x)
}

// challenge is the challenger's half of the fan-out; it signals x.done
// when x.chal is complete.
func (rt *runtime) challenge(ctx context.Context, ro *route, r *http.Request, h http.Header, body []byte, x *exchange) {
	c := &x.chal
	rt.srv.fetch(ctx, rt.chal, &ro.adapter, r, h, body, c)
	if obs := rt.srv.observer; obs != nil && c.kind != kindCanceled {
		err := c.err
		if err == nil {
			err = c.listErr
		}
		obs.ObserveChallenger(c.dur, err)
	}
	x.done <- struct{}{}
}

// decide picks what to serve once both answers are in.
func (rt *runtime) decide(w http.ResponseWriter, ro *route, x *exchange) (outcome, reason) {
	inc, chal := &x.inc, &x.chal
	switch {
	case incumbentFailed(inc):
		return rt.incumbentFailure(w, x, rt.serveChallenger)
	case inc.kind == kindStatus:
		return rt.serveIncumbent(w, x, reasonIncumbentStatus)
	case inc.listErr != nil:
		return rt.serveIncumbent(w, x, reasonIncumbentBody)
	case len(inc.list.ids) == 0 && ro.slots == 0:
		return rt.serveIncumbent(w, x, reasonIncumbentEmpty)
	}
	if why := challengerReason(chal); why != reasonNone {
		return rt.serveIncumbent(w, x, why)
	}
	n := ro.slots
	if n == 0 {
		n = len(inc.list.ids)
	}
	slots := merge.Interleave(rt.policy, make([]merge.Slot, 0, n), inc.list.ids, chal.list.ids, n, x.seed(), rt.hedge)
	out, err := rewrite(x.out[:0], &inc.list, &chal.list, slots)
	x.out = out[:0]
	if err != nil {
		rt.srv.log.Error("merged list does not match its sources", "route", ro.path, "err", err)
		return rt.serveIncumbent(w, x, reasonMerge)
	}
	writeBody(w, inc.status, inc.header, out)
	rt.record(x, slots, reasonNone)
	return outInterleaved, reasonNone
}

// serveIncumbent serves the incumbent's answer as it came, and records
// an incumbent-only impression unless the answer was not a list at all.
// The record's slots are the list's elements with an identity, first
// occurrences only; elements without one are still shown, as sent.
func (rt *runtime) serveIncumbent(w http.ResponseWriter, x *exchange, why reason) (outcome, reason) {
	inc := &x.inc
	writeBody(w, inc.status, inc.header, inc.body.Bytes())
	if inc.kind == kindNone {
		var slots []merge.Slot
		if inc.listErr == nil {
			slots = soloSlots(&inc.list, merge.Incumbent)
		}
		rt.record(x, slots, why)
	}
	return outIncumbentOnly, why
}

// incumbentFailure answers for a failed incumbent: with the challenger's
// response when allowed and usable, else with a 502.
func (rt *runtime) incumbentFailure(w http.ResponseWriter, x *exchange, serveChallenger bool) (outcome, reason) {
	why := failureReason(x.inc.kind, false)
	if chal := &x.chal; serveChallenger && chal.ok() && len(chal.list.ids) > 0 {
		writeBody(w, chal.status, chal.header, chal.body.Bytes())
		rt.record(x, soloSlots(&chal.list, merge.Challenger), why)
		return outChallengerOnly, why
	}
	writeError(w, http.StatusBadGateway, "incumbent", why.String(), x.inc.err.Error())
	return outFailed, why
}

// incumbentFailed reports whether the incumbent's answer is a failure that
// on_incumbent_failure governs: no answer, an unreadable body, or a 5xx.
// A 4xx is the client's to see and is passed on as it came.
func incumbentFailed(c *call) bool {
	return c.kind == kindTimeout || c.kind == kindConnect || c.kind == kindBody ||
		c.kind == kindCanceled || (c.kind == kindStatus && c.status >= 500)
}

func challengerReason(c *call) reason {
	switch {
	case c.kind != kindNone:
		return failureReason(c.kind, true)
	case c.listErr != nil:
		return reasonChallengerBody
	case len(c.list.ids) == 0:
		return reasonChallengerEmpty
	}
	return reasonNone
}

// record hands the impression's provenance to the sink; the sink does not
// block, and the response has already been written.
func (rt *runtime) record(x *exchange, slots []merge.Slot, why reason) {
	sink := rt.srv.sink
	if sink == nil {
		return
	}
	im := &store.Impression{
		ID: x.id, Time: x.start, Experiment: rt.experiment, User: x.user,
		Seed: x.seed(), Slots: slots, Fallback: why.String(),
	}
	if why == reasonNone {
		im.Policy = rt.policy.Name()
		if q := x.kept; q != nil {
			q.Lengths = [2]int32{int32(len(x.inc.list.ids)), int32(len(x.chal.list.ids))}
			im.Request = q
		}
	}
	sink.Record(im)
}

// exchange is one route request's scratch state, pooled.
type exchange struct {
	id       store.ID
	start    time.Time
	user     uint64
	seedVal  uint64
	seedDone bool
	req      bytes.Buffer
	lim      io.LimitedReader
	inc      call
	chal     call
	out      []byte
	done     chan struct{}
	kept     *store.Request // the request to keep with the impression, if any
}

func (x *exchange) seed() uint64 {
	if !x.seedDone {
		x.seedVal, x.seedDone = x.id.Seed(), true
	}
	return x.seedVal
}

// of returns the request to keep with an interleaved impression of route,
// or nil when requests are not kept or this one is over the size bound.
// It copies what it keeps: the exchange's buffers are reused.
func (k *keepRequests) of(r *http.Request, route string, body []byte) *store.Request {
	if !k.on {
		return nil
	}
	size := int64(len(body))
	q := &store.Request{Route: route, Method: r.Method, Path: r.URL.Path, Query: r.URL.RawQuery}
	for _, name := range k.headers {
		for _, v := range r.Header[name] {
			size += int64(len(name) + len(v))
			q.Header = append(q.Header, [2]string{name, v})
		}
	}
	if size > k.bytes {
		return nil
	}
	if len(body) > 0 {
		q.Body = bytes.Clone(body)
	}
	return q
}
