// Package bufpool keeps the byte buffers of request bodies for the next
// request. A buffer of up to MaxPooled bytes comes from one of the size
// classes, the powers of two from 4 KiB to 1 MiB; each class keeps at most
// 512 KiB of free buffers (at least one), so the pool never holds more than
// 5 MiB, whatever the traffic was. A larger buffer is made fresh at the size
// asked for and never kept: a 48 MB upload does not pin 48 MB here. Room
// for bytes still to come (Ahead) is pooled only up to MaxAhead; a buffer
// that grows as bytes arrive (Grow) doubles through the classes.
//
// A buffer is Put back by its one owner once nothing can read it any more
// (for a body: after the answer is written, since the decoders, the saved
// study and the report's input may read the bytes until then). Under Poison
// the pool fills every buffer it takes back with a pattern, checks on Get
// that the pattern is intact, and panics on a buffer put back twice, so a
// reader after release gives a wrong answer and a writer after release or a
// double release stops the test.
package bufpool

import (
	"bytes"
	"math/bits"
	"slices"
	"sync"
	"sync/atomic"
)

const (
	minShift = 12 // 4 KiB, the smallest class
	maxShift = 20 // 1 MiB, the largest
	// MaxPooled is the largest buffer the pool keeps.
	MaxPooled = 1 << maxShift
	// classBytes is what one class keeps at most (at least one buffer).
	classBytes = 512 << 10
)

// class is one size class: a stack of free buffers of 1<<shift bytes.
type class struct {
	mu   sync.Mutex
	free [][]byte
}

var (
	classes [maxShift - minShift + 1]class
	poison  atomic.Bool
	gets    atomic.Int64
	reused  atomic.Int64
)

// keep is the number of free buffers class k keeps.
func keep(k int) int { return max(1, classBytes>>(k+minShift)) }

func init() {
	for k := range classes {
		classes[k].free = make([][]byte, 0, keep(k))
	}
}

// classOf is the class of the smallest buffer of at least n bytes
// (n ≤ MaxPooled).
func classOf(n int) int {
	if n <= 1<<minShift {
		return 0
	}
	return bits.Len(uint(n-1)) - minShift
}

// Get returns an empty buffer with room for at least n bytes: a pooled one
// of n's class when n ≤ MaxPooled, else a fresh one of exactly n bytes.
func Get(n int) []byte {
	if n > MaxPooled {
		return make([]byte, 0, n)
	}
	k := classOf(n)
	c := &classes[k]
	gets.Add(1)
	c.mu.Lock()
	if i := len(c.free) - 1; i >= 0 {
		b := c.free[i]
		c.free[i] = nil
		c.free = c.free[:i]
		c.mu.Unlock()
		reused.Add(1)
		if poison.Load() && bytes.Count(b[:cap(b)], pattern[:1]) != cap(b) {
			panic("bufpool: a buffer was written after it was put back")
		}
		return b[:0]
	}
	c.mu.Unlock()
	return make([]byte, 0, 1<<(k+minShift))
}

// MaxAhead is the largest buffer Ahead takes from the pool: the intake
// budget charges a request for up to 256 KiB before its first byte
// arrives, and a pooled buffer's pages are resident already, so an upload
// that stalls holds at most twice what it has been charged.
const MaxAhead = 512 << 10

// Ahead returns an empty buffer for n bytes that have not arrived yet (a
// declared length): pooled up to MaxAhead, else fresh, its pages becoming
// resident only as bytes are written.
func Ahead(n int) []byte {
	if n > MaxAhead {
		return make([]byte, 0, n)
	}
	return Get(n)
}

// Put gives b back to the pool. Only b's owner may put it, once, when
// nothing can read or write it any more; a buffer of another capacity than
// a class's (a fresh large one, nil) is left to the collector.
func Put(b []byte) {
	if !Keeps(b) {
		return
	}
	n := cap(b)
	b = b[:n]
	c := &classes[classOf(n)]
	c.mu.Lock()
	if poison.Load() { // under the lock: Poison empties the class after turning on
		fill(b)
		for _, f := range c.free {
			if &f[:1][0] == &b[0] {
				c.mu.Unlock()
				panic("bufpool: a buffer was put back twice")
			}
		}
	}
	if len(c.free) < cap(c.free) {
		c.free = append(c.free, b[:0])
	}
	c.mu.Unlock()
}

// Keeps says whether Put would keep b: whether its capacity is a class's.
func Keeps(b []byte) bool {
	n := cap(b)
	return n >= 1<<minShift && n <= MaxPooled && n&(n-1) == 0
}

// Grow returns b with room for n more bytes: b itself when it has it,
// else its bytes in a pooled buffer of the class of len(b)+n, or beyond
// MaxPooled in a buffer grown as append grows one (slices.Grow); b goes
// back to the pool then, so the caller must own it.
func Grow(b []byte, n int) []byte {
	need := len(b) + n
	if need <= cap(b) {
		return b
	}
	var nb []byte
	if need <= MaxPooled {
		nb = append(Get(need), b...)
	} else {
		nb = slices.Grow(b, n)
	}
	Put(b)
	return nb
}

// pattern is what Poison writes into a buffer put back: not a number, a
// line break or a JSON token, so a reader after release reads a different
// body.
var pattern = [1]byte{0xA5}

func fill(b []byte) {
	for i := range b {
		b[i] = pattern[0]
	}
}

// Poison turns the checks described above on or off and says whether they
// were on (for tests; it costs a pass over every buffer put back). It
// empties the pool, so that every pooled buffer carries the pattern.
func Poison(on bool) (was bool) {
	was = poison.Swap(on)
	for k := range classes {
		c := &classes[k]
		c.mu.Lock()
		clear(c.free[:cap(c.free)])
		c.free = c.free[:0]
		c.mu.Unlock()
	}
	return
}

// Stats are the Gets of pooled sizes since the process started and how
// many of them reused a buffer (for tests and measurements).
func Stats() (pooledGets, reusedGets int64) { return gets.Load(), reused.Load() }
