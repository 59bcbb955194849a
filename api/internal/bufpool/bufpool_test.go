package bufpool

import (
	"bytes"
	"fmt"
	"slices"
	"sync"
	"testing"
)

// empty takes every free buffer out of the pool, so that a test starts
// from nothing.
func empty(t *testing.T) {
	t.Helper()
	Poison(false)
	t.Cleanup(func() { Poison(false) })
}

// Sizes: up to MaxPooled a power of two from 4 KiB, the smallest that
// holds n; above it exactly n, never kept.
func TestGetSizes(t *testing.T) {
	empty(t)
	for _, c := range []struct{ n, cap int }{
		{0, 4 << 10}, {1, 4 << 10}, {4 << 10, 4 << 10}, {4<<10 + 1, 8 << 10}, {1908, 4 << 10},
		{100 << 10, 128 << 10}, {512<<10 + 1, 1 << 20}, {1 << 20, 1 << 20},
		{1<<20 + 1, 1<<20 + 1}, {48_000_000, 48_000_000},
	} {
		b := Get(c.n)
		if len(b) != 0 || cap(b) != c.cap {
			t.Errorf("Get(%d): len %d cap %d, want 0 and %d", c.n, len(b), cap(b), c.cap)
		}
		Put(b)
	}
	big := Get(1<<20 + 1)
	Put(big)
	if again := Get(1<<20 + 1); &again[:1][0] == &big[:1][0] {
		t.Error("a buffer above MaxPooled was kept")
	}
}

// Ahead pools room for bytes still to come only up to MaxAhead; above
// it the buffer is fresh, of the size asked for.
func TestAhead(t *testing.T) {
	empty(t)
	for _, c := range []struct {
		n, cap int
		pooled bool
	}{{1908, 4 << 10, true}, {300 << 10, 512 << 10, true}, {MaxAhead, MaxAhead, true}, {MaxAhead + 1, MaxAhead + 1, false}, {5 << 20, 5 << 20, false}} {
		gets, _ := Stats()
		b := Ahead(c.n)
		after, _ := Stats()
		if cap(b) != c.cap || (after > gets) != c.pooled {
			t.Errorf("Ahead(%d): cap %d, from the pool %v; want %d, %v", c.n, cap(b), after > gets, c.cap, c.pooled)
		}
	}
}

// A buffer put back is the next one of its class taken; a buffer of
// another capacity is not kept; each class keeps at most classBytes
// (at least one buffer), so the pool holds at most 5 MiB.
func TestReuseAndBound(t *testing.T) {
	empty(t)
	b := Get(3000)
	Put(b)
	if c := Get(4000); &c[:1][0] != &b[:1][0] {
		t.Error("a buffer put back was not reused by the next Get of its class")
	}
	odd := make([]byte, 0, 5000)
	Put(odd)
	if c := Get(5000); &c[:1][0] == &odd[:1][0] {
		t.Error("a buffer whose capacity is no class was kept")
	}
	total := 0
	for k := range classes {
		size := 1 << (k + minShift)
		var bs [][]byte
		for range keep(k) + 3 {
			bs = append(bs, make([]byte, 0, size))
		}
		for _, b := range bs {
			Put(b)
		}
		kept := 0
		for range keep(k) + 3 {
			c := Get(size)
			if slices.ContainsFunc(bs, func(b []byte) bool { return &b[:1][0] == &c[:1][0] }) {
				kept++
			}
		}
		if want := max(1, classBytes/size); kept != want {
			t.Errorf("class %d B kept %d buffers, want %d", size, kept, want)
		}
		total += kept * size
	}
	if total != 5<<20 {
		t.Errorf("the pool keeps %d bytes at most, want 5 MiB", total)
	}
}

// Grow keeps the bytes, uses the class of what is needed up to MaxPooled
// and beyond grows as slices.Grow does (the body's capacity, which the
// intake budget's steps follow for a chunked body, is what it was); the
// buffer left goes back.
func TestGrow(t *testing.T) {
	empty(t)
	var b []byte
	for size := 4 << 10; size <= 64<<20; size *= 2 {
		old := b
		b = Grow(b, size-len(b))
		want := cap(slices.Grow(slices.Clone(old), size-len(old)))
		if size <= MaxPooled {
			want = size
		}
		if cap(b) != want || !bytes.Equal(b, old) {
			t.Fatalf("Grow to %d: cap %d, want %d; bytes kept %v", size, cap(b), want, bytes.Equal(b, old))
		}
		b = append(b, bytes.Repeat([]byte{byte(size >> 12)}, cap(b)-len(b)-1)...)
		if old != nil && cap(old) <= MaxPooled {
			if c := Get(cap(old)); &c[:1][0] != &old[:1][0] {
				t.Fatalf("Grow to %d did not put the %d-byte buffer back", size, cap(old))
			}
		}
	}
	if c := Grow(b, 1); &c[0] != &b[0] {
		t.Error("Grow moved a buffer that had room")
	}
}

// Under Poison a buffer put back reads as the pattern, a write after it is
// found when the buffer is taken again, and a second Put panics.
func TestPoison(t *testing.T) {
	empty(t)
	Poison(true)
	b := append(Get(10), "x,y\n1,2\n"...)
	alias := b[:8]
	Put(b)
	if string(alias) == "x,y\n1,2\n" || bytes.Count(alias, pattern[:]) != len(alias) {
		t.Errorf("a slice of a buffer put back still reads %q", alias)
	}
	mustPanic(t, "a second Put", func() { Put(b) })
	alias[3] = 'z'
	mustPanic(t, "a Get after a write to a buffer put back", func() { Get(10) })
	Poison(true)
	c := Get(10)
	Put(c)
	if d := Get(10); &d[:1][0] != &c[:1][0] {
		t.Error("under Poison a buffer put back once is not reused")
	}
}

func mustPanic(t *testing.T, what string, f func()) {
	t.Helper()
	defer func() {
		if recover() == nil {
			t.Errorf("%s did not panic", what)
		}
	}()
	f()
}

// Goroutines taking, filling, checking and putting back buffers of every
// class at once never see each other's bytes (run with -race).
func TestConcurrentOwners(t *testing.T) {
	empty(t)
	Poison(true)
	var wg sync.WaitGroup
	for g := range 8 {
		wg.Go(func() {
			for i := range 300 {
				n := 1 << (i % 11 * 2) // 1 B to 1 MiB, then grown past it
				b := Get(n)
				fill := byte('a' + g)
				b = append(b, bytes.Repeat([]byte{fill}, n)...)
				b = Grow(b, n/3+1)
				if bytes.Count(b, []byte{fill}) != n {
					panic(fmt.Sprintf("goroutine %d: its buffer of %d bytes changed", g, n))
				}
				Put(b)
			}
		})
	}
	wg.Wait()
}
