package postgres

import (
	"context"
	"errors"
	"fmt"
	"time"

	"riffle/store"
)

// Record hands im to this sidecar's writer and reports whether it was
// queued. It never blocks and never touches the database: when the queue
// is full (the database slow or down for longer than the queue lasts) or
// the store is closed, the impression is dropped, counted, and false
// returned. The caller must not modify im afterwards.
func (s *Store) Record(im *store.Impression) bool {
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

// Flush writes every impression queued before the call and returns the
// write's error (wrapping store.ErrUnavailable while the database is down).
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
		return fmt.Errorf("store postgres: flush: %w", ctx.Err())
	}
	s.mu.RUnlock()
	select {
	case err := <-ch:
		return err
	case <-ctx.Done():
		return fmt.Errorf("store postgres: flush: %w", ctx.Err())
	}
}

func (s *Store) unwritable() error {
	if s.opt.ReadOnly {
		return fmt.Errorf("store postgres: %w", store.ErrReadOnly)
	}
	return fmt.Errorf("store postgres: %w", store.ErrClosed)
}

// Retry backoff of a failed batch while the database is down.
const (
	retryFirst = 100 * time.Millisecond
	retryMax   = 2 * time.Second
)

// writer is the one goroutine that writes this sidecar's impressions, on
// the bbolt writer's group-commit rule: a batch is written when it holds
// opt.Batch impressions or its oldest has waited opt.Interval, and a flush
// writes at once. A batch that fails is kept and retried with backoff; the
// queue absorbs new impressions meanwhile, and Record drops (and counts)
// once it is full.
func (s *Store) writer() {
	defer close(s.done)
	batch := make([]*store.Impression, 0, s.opt.Batch)
	timer := time.NewTimer(time.Hour)
	timer.Stop()
	var failed error
	backoff := retryFirst
	for {
		if failed != nil {
			batch, failed, backoff = s.retry(batch, failed, backoff)
			if batch == nil {
				return
			}
			continue
		}
		select {
		case im := <-s.queue:
			if len(batch) == 0 {
				timer.Reset(s.opt.Interval)
			}
			if batch = append(batch, im); len(batch) >= s.opt.Batch {
				timer.Stop()
				batch, failed = s.commit(batch, false)
			}
		case <-timer.C:
			batch, failed = s.commit(batch, false)
		case ch := <-s.flushes:
			timer.Stop()
			batch, failed = s.commit(s.drain(batch), false)
			ch <- failed
		case <-s.quit:
			timer.Stop()
			s.final(s.drain(batch))
			return
		}
	}
}

// retry waits out the backoff (answering flushes with the last error) and
// writes the failed batch again; it returns a nil batch when the store is
// closing.
func (s *Store) retry(batch []*store.Impression, failed error, backoff time.Duration) ([]*store.Impression, error, time.Duration) {
	wait := time.NewTimer(backoff)
	defer wait.Stop()
	for {
		select {
		case <-wait.C:
			batch, failed = s.commit(batch, true)
			return batch, failed, min(2*backoff, retryMax)
		case ch := <-s.flushes:
			ch <- failed
		case <-s.quit:
			s.final(s.drain(batch))
			return nil, nil, 0
		}
	}
}

// final writes what is left at Close, waiting at most the timeout; what
// cannot be written is counted as dropped.
func (s *Store) final(batch []*store.Impression) {
	if len(batch) == 0 {
		return
	}
	ctx, cancel := context.WithTimeout(context.Background(), s.opt.Timeout)
	defer cancel()
	if err := s.write(ctx, batch, true); err != nil {
		s.lastErr = fmt.Errorf("store postgres: last write of %d impressions at close: %w", len(batch), err)
		s.log.Error("store postgres: impressions dropped at close", "impressions", len(batch), "err", err)
		s.m.dropped.Add(float64(len(batch)))
	}
}

// drain appends every impression waiting in the queue to batch.
func (s *Store) drain(batch []*store.Impression) []*store.Impression {
	for n := len(s.queue); n > 0; n-- {
		batch = append(batch, <-s.queue)
	}
	return batch
}

// commit writes batch, bounded by the timeout. On success it returns the
// batch emptied for reuse; on failure the batch itself, to retry.
func (s *Store) commit(batch []*store.Impression, again bool) ([]*store.Impression, error) {
	if len(batch) == 0 {
		return batch, nil
	}
	ctx, cancel := context.WithTimeout(context.Background(), s.opt.Timeout)
	defer cancel()
	if err := s.write(ctx, batch, again); err != nil {
		if !errors.Is(err, store.ErrUnavailable) {
			// The database refused the batch itself: retrying cannot help.
			s.log.Error("store postgres: impressions refused; dropped", "impressions", len(batch), "err", err)
			s.m.dropped.Add(float64(len(batch)))
			clear(batch)
			return batch[:0], nil
		}
		if !again {
			s.log.Warn("store postgres: impressions not written yet; retrying while the queue absorbs", "impressions", len(batch), "err", err)
		}
		return batch, err
	}
	clear(batch)
	return batch[:0], nil
}
