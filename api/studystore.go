package api

import (
	"context"
	"errors"
	"fmt"
	"sync"
	"time"

	"eivfit/eiv/study"
)

// OpenStore opens the study store; observe is to be called after every
// store operation (store.Config.Observe), feeding the metrics.
type OpenStore func(ctx context.Context, observe func(op string, d time.Duration, err error)) (study.Store, error)

// storeHandle holds the study store once it is open. NewServer tries once;
// while the database cannot be reached it retries in the background with
// backoff (0.5 s doubling to 30 s), /readyz says not ready and the store
// routes answer 503; computations without save work throughout.
type storeHandle struct {
	mu     sync.RWMutex
	store  study.Store
	cancel context.CancelFunc
	done   chan struct{}
}

var errNoStore = fmt.Errorf("%w: the study store is not open yet", study.ErrUnavailable)

// get returns the open store, or an error wrapping study.ErrUnavailable.
func (h *storeHandle) get() (study.Store, error) {
	if h == nil {
		return nil, fmt.Errorf("%w: this server keeps no studies", study.ErrUnavailable)
	}
	h.mu.RLock()
	defer h.mu.RUnlock()
	if h.store == nil {
		return nil, errNoStore
	}
	return h.store, nil
}

func (s *Server) openStore(open OpenStore) *storeHandle {
	ctx, cancel := context.WithCancel(context.Background())
	h := &storeHandle{cancel: cancel, done: make(chan struct{})}
	try := func() bool {
		octx, ocancel := context.WithTimeout(ctx, 30*time.Second)
		defer ocancel()
		st, err := open(octx, s.observeStore)
		if err != nil {
			s.cfg.Logger.Warn("study store: cannot open; retrying", "error", err.Error())
			return false
		}
		h.mu.Lock()
		h.store = st
		h.mu.Unlock()
		return true
	}
	if try() {
		close(h.done)
		return h
	}
	go func() {
		defer close(h.done)
		wait := 500 * time.Millisecond
		for {
			select {
			case <-ctx.Done():
				return
			case <-time.After(wait):
			}
			if try() {
				s.cfg.Logger.Info("study store: open")
				return
			}
			wait = min(2*wait, 30*time.Second)
		}
	}()
	return h
}

// close stops the retries and closes the store.
func (h *storeHandle) close() error {
	if h == nil {
		return nil
	}
	h.cancel()
	<-h.done
	h.mu.Lock()
	defer h.mu.Unlock()
	if h.store == nil {
		return nil
	}
	err := h.store.Close()
	h.store = nil
	return err
}

// observeStore records one store operation's latency and, on failure, its
// error class.
func (s *Server) observeStore(op string, d time.Duration, err error) {
	s.metrics.storeDuration.WithLabelValues(op).Observe(d.Seconds())
	if err != nil {
		class := "other"
		for _, e := range []struct {
			err  error
			name string
		}{{study.ErrNotFound, "not_found"}, {study.ErrConflict, "conflict"}, {study.ErrUnavailable, "unavailable"}, {study.ErrInvalid, "invalid"}} {
			if errors.Is(err, e.err) {
				class = e.name
				break
			}
		}
		s.metrics.storeErrors.WithLabelValues(op, class).Inc()
	}
}

// Close closes the study store (after Serve has returned).
func (s *Server) Close() error { return s.store.close() }
