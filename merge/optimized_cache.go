package merge

import (
	"container/list"
	"sync"
)

// optCache is a bounded least-recently-used map from overlap structure to
// solved distribution, safe for concurrent use. Solutions are immutable once
// stored, so callers share them without copying.
type optCache struct {
	mu    sync.Mutex
	size  int
	byKey map[optKey]*list.Element
	order *list.List // of *optEntry, most recently used first
}

// optEntry is one cached solution.
type optEntry struct {
	key optKey
	sol *optSolution
}

// newOptCache returns an empty cache holding at most size solutions.
func newOptCache(size int) *optCache {
	return &optCache{size: size, byKey: make(map[optKey]*list.Element), order: list.New()}
}

// get returns the solution stored under k, if any, marking it recently used.
func (c *optCache) get(k optKey) (*optSolution, bool) {
	c.mu.Lock()
	defer c.mu.Unlock()
	el, ok := c.byKey[k]
	if !ok {
		return nil, false
	}
	c.order.MoveToFront(el)
	return el.Value.(*optEntry).sol, true
}

// put stores sol under k, evicting the least recently used solution when
// the cache is full.
func (c *optCache) put(k optKey, sol *optSolution) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if el, ok := c.byKey[k]; ok {
		el.Value.(*optEntry).sol = sol
		c.order.MoveToFront(el)
		return
	}
	if c.order.Len() >= c.size {
		old := c.order.Back()
		c.order.Remove(old)
		delete(c.byKey, old.Value.(*optEntry).key)
	}
	c.byKey[k] = c.order.PushFront(&optEntry{key: k, sol: sol})
}

// count returns how many solutions the cache holds.
func (c *optCache) count() int {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.order.Len()
}

// solution returns the distribution for structure k, from the cache when it
// is there, else solved (and cached). A structure the program cannot solve
// falls back to optFallback, which is cached the same way.
func (o *Optimized) solution(k optKey) *optSolution {
	if o.cache != nil {
		if sol, ok := o.cache.get(k); ok {
			return sol
		}
	}
	sol, err := o.solve(k)
	if err != nil {
		sol = optFallback(k)
	}
	if o.cache != nil {
		o.cache.put(k, sol)
	}
	return sol
}
