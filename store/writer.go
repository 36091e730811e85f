package store

import (
	"context"
	"fmt"
	"time"

	bolt "go.etcd.io/bbolt"
)

// Record hands im to the group-commit writer and reports whether it was
// queued. It never blocks: when the queue is full, or the store is closed
// or read-only, the impression is dropped, counted, and false returned.
// The caller must not modify im afterwards. A zero Time is taken from the
// id; an impression without an experiment name is dropped.
func (s *Store) Record(im *Impression) bool {
	s.mu.RLock()
	defer s.mu.RUnlock()
	if s.closed || s.queue == nil || im == nil || im.Experiment == "" {
		if s.m != nil {
			s.m.dropped.Inc()
		}
		return false
	}
	select {
	case s.queue <- im:
		s.m.queued.Inc()
		return true
	default:
		s.m.dropped.Inc()
		return false
	}
}

// Flush commits every impression queued before the call and returns the
// commit's error. Graceful shutdown does the same through Close.
func (s *Store) Flush(ctx context.Context) error {
	ch := make(chan error, 1)
	s.mu.RLock()
	if s.closed || s.flushes == nil {
		s.mu.RUnlock()
		return s.unwritable()
	}
	select {
	case s.flushes <- ch:
	case <-ctx.Done():
		s.mu.RUnlock()
		return fmt.Errorf("store %s: flush: %w", s.path, ctx.Err())
	}
	s.mu.RUnlock()
	select {
	case err := <-ch:
		return err
	case <-ctx.Done():
		return fmt.Errorf("store %s: flush: %w", s.path, ctx.Err())
	}
}

// unwritable returns ErrReadOnly or ErrClosed, whichever applies.
func (s *Store) unwritable() error {
	if s.opt.ReadOnly {
		return fmt.Errorf("store %s: %w", s.path, ErrReadOnly)
	}
	return fmt.Errorf("store %s: %w", s.path, ErrClosed)
}

// writer is the one goroutine that commits queued impressions: a batch is
// written when it reaches opt.Batch records or its oldest record has waited
// opt.Interval. Event requests and flushes first take everything queued, so
// an event finds its impression even when that was still waiting.
func (s *Store) writer() {
	defer close(s.done)
	batch := make([]*Impression, 0, s.opt.Batch)
	timer := time.NewTimer(time.Hour)
	timer.Stop()
	for {
		select {
		case im := <-s.queue:
			if len(batch) == 0 {
				timer.Reset(s.opt.Interval)
			}
			if batch = append(batch, im); len(batch) >= s.opt.Batch {
				timer.Stop()
				batch, _ = s.commit(batch, nil)
			}
		case <-timer.C:
			batch, _ = s.commit(batch, nil)
		case req := <-s.events:
			timer.Stop()
			// Requests first, then the queue: every impression recorded
			// before a request was sent is then in this commit.
			reqs := s.moreEvents([]*eventReq{req})
			batch, _ = s.commit(s.drain(batch), reqs)
		case ch := <-s.flushes:
			timer.Stop()
			var err error
			batch, err = s.commit(s.drain(batch), nil)
			ch <- err
		case <-s.quit:
			timer.Stop()
			reqs := s.moreEvents(nil)
			_, s.lastErr = s.commit(s.drain(batch), reqs)
			return
		}
	}
}

// drain appends every impression waiting in the queue to batch.
func (s *Store) drain(batch []*Impression) []*Impression {
	for n := len(s.queue); n > 0; n-- {
		batch = append(batch, <-s.queue)
	}
	return batch
}

// moreEvents appends every event request waiting to reqs.
func (s *Store) moreEvents(reqs []*eventReq) []*eventReq {
	for {
		select {
		case r := <-s.events:
			reqs = append(reqs, r)
		default:
			return reqs
		}
	}
}

// commit writes ims and the event requests in one transaction (one fsync),
// answers the requests, and returns ims emptied for reuse.
func (s *Store) commit(ims []*Impression, reqs []*eventReq) ([]*Impression, error) {
	if len(ims) == 0 && len(reqs) == 0 {
		return ims, nil
	}
	start := time.Now()
	var stored int
	err := s.db.Update(func(tx *bolt.Tx) error {
		n, err := s.putImpressions(tx, ims)
		if err != nil {
			return err
		}
		stored = n
		rules := s.rules.Load()
		for _, r := range reqs {
			if err := s.putEvents(tx, rules, r); err != nil {
				return err
			}
		}
		return nil
	})
	s.m.commitSeconds.Observe(time.Since(start).Seconds())
	if err != nil {
		err = fmt.Errorf("store %s: commit %d impressions: %w", s.path, len(ims), err)
		s.log.Error("store: commit failed; impressions dropped", "path", s.path, "impressions", len(ims), "err", err)
		s.m.dropped.Add(float64(len(ims)))
	} else {
		s.m.committed.Add(float64(stored))
	}
	for _, r := range reqs {
		r.finish(err)
	}
	clear(ims)
	return ims[:0], err
}

// putImpressions stores ims with their open-index entries and folds them
// into the experiments' totals. It returns how many were stored; an id
// already present is skipped and logged.
func (s *Store) putImpressions(tx *bolt.Tx, ims []*Impression) (int, error) {
	if len(ims) == 0 {
		return 0, nil
	}
	imp, open := tx.Bucket(bucketImp), tx.Bucket(bucketOpen)
	imp.FillPercent, open.FillPercent = 0.95, 0.95 // keys arrive almost in order
	deltas := make(map[string]*served)
	stored := 0
	for _, im := range ims {
		if im.Time.IsZero() {
			im.Time = im.ID.Time()
		}
		if imp.Get(im.ID[:]) != nil {
			s.log.Warn("store: impression id already stored; skipped", "impression", im.ID)
			continue
		}
		if err := imp.Put(im.ID[:], encodeRecord(nil, &record{Impression: *im})); err != nil {
			return 0, fmt.Errorf("put impression %s: %w", im.ID, err)
		}
		if err := open.Put(openKey(im.Time, im.ID), nil); err != nil {
			return 0, fmt.Errorf("index impression %s: %w", im.ID, err)
		}
		d := deltas[im.Experiment]
		if d == nil {
			d = &served{}
			deltas[im.Experiment] = d
		}
		d.add(im)
		stored++
	}
	return stored, s.addServed(tx, deltas)
}

// openKey is the open index's key: the impression's time, then its id.
func openKey(t time.Time, id ID) []byte {
	k := make([]byte, 8, 8+len(id))
	putNanos(k, t)
	return append(k, id[:]...)
}
