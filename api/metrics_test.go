package api

import (
	"fmt"
	"sync"
	"testing"
)

// TestLabelCache: the cached children are the vector's own (a count made
// through the cache is the vector's count), concurrent first uses of a
// label set count every increment, and label sets beyond the cache's bound
// are still counted, through the vector.
func TestLabelCache(t *testing.T) {
	for _, c := range []struct {
		name       string
		keys       int // distinct label sets
		goroutines int
		each       int // increments per goroutine and label set
	}{
		{"one label set, concurrent first use", 1, 8, 500},
		{"a few label sets", 5, 4, 100},
		{"more label sets than the cache holds", maxCachedLabels + 100, 2, 2},
	} {
		t.Run(c.name, func(t *testing.T) {
			m := newMetrics(1)
			var wg sync.WaitGroup
			for range c.goroutines {
				wg.Add(1)
				go func() {
					defer wg.Done()
					for k := range c.keys {
						for range c.each {
							m.requestsOf.get(requestLabels{fmt.Sprintf("/r%d", k), "POST", 200}).Inc()
						}
					}
				}()
			}
			wg.Wait()
			got := requestCounts(t, m)
			for k := range c.keys {
				if got, want := got[fmt.Sprintf("/r%d", k)], float64(c.goroutines*c.each); got != want {
					t.Fatalf("label set %d counted %v, want %v", k, got, want)
				}
			}
			if len(got) != c.keys {
				t.Errorf("%d label sets exported, want %d", len(got), c.keys)
			}
			if n := len(*m.requestsOf.m.Load()); n > maxCachedLabels {
				t.Errorf("the cache holds %d children, more than %d", n, maxCachedLabels)
			}
		})
	}
}

// requestCounts reads eivfit_http_requests_total from the registry, by
// route.
func requestCounts(t *testing.T, m *metrics) map[string]float64 {
	t.Helper()
	fams, err := m.reg.Gather()
	if err != nil {
		t.Fatal(err)
	}
	out := map[string]float64{}
	for _, f := range fams {
		if f.GetName() != "eivfit_http_requests_total" {
			continue
		}
		for _, mt := range f.GetMetric() {
			for _, l := range mt.GetLabel() {
				if l.GetName() == "route" {
					out[l.GetValue()] += mt.GetCounter().GetValue()
				}
			}
		}
	}
	return out
}
