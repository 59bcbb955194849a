package api

import (
	"context"
	"sync"
)

// budget is a weighted semaphore: acquire(n) waits until n units are free
// or ctx ends. A request for more than the whole budget takes all of it,
// so that one maximum-size request can always run alone.
type budget struct {
	mu   sync.Mutex
	cap  int64
	free int64
	wake chan struct{}
}

func newBudget(n int64) *budget {
	return &budget{cap: n, free: n, wake: make(chan struct{})}
}

func (b *budget) acquire(ctx context.Context, n int64) bool {
	n = min(n, b.cap)
	for {
		b.mu.Lock()
		if n <= b.free {
			b.free -= n
			b.mu.Unlock()
			return true
		}
		ch := b.wake
		b.mu.Unlock()
		select {
		case <-ch:
		case <-ctx.Done():
			return false
		}
	}
}

// tryAcquire takes n units if they are free now, without waiting.
func (b *budget) tryAcquire(n int64) bool {
	n = min(n, b.cap)
	b.mu.Lock()
	defer b.mu.Unlock()
	if n > b.free {
		return false
	}
	b.free -= n
	return true
}

func (b *budget) release(n int64) {
	n = min(n, b.cap)
	b.mu.Lock()
	b.free += n
	close(b.wake) // wake every waiter; each tries again
	b.wake = make(chan struct{})
	b.mu.Unlock()
}

// available is the number of units free now.
func (b *budget) available() int64 {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.free
}
