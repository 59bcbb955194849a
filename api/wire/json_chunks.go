package wire

import (
	"bytes"
	"runtime"
	"sync"
	"sync/atomic"
)

// A large points array is read in chunks on every core. The chunks are
// cut at guessed element boundaries (a ',' then '{'), found without
// parsing, so a guess can fall inside a string such as an id. The guesses
// are checked afterwards: chunk k's reading must end exactly where chunk
// k+1 began, and then k+1 was read from a true element start, in the same
// state a single pass would have reached it, so its points are the single
// pass's. On any fault, wrong guess or limit the array is read again in
// one pass, which names the fault exactly as before: chunking changes
// speed, never an answer or a message.

// chunkMin is the smallest chunk worth a goroutine (about 15,000 points
// of x, y, sx, sy).
const chunkMin = 1 << 20

// chunksPerProc cuts more chunks than cores, so that a core slowed by
// other work does not hold the others up.
const chunksPerProc = 4

// chunkPlan is how many chunks (parts) of at least size bytes a points
// array is cut into, read by procs goroutines.
type chunkPlan struct{ size, parts, procs int }

// plan fills in the defaults: chunkMin, chunksPerProc chunks per core.
func (c chunkPlan) plan() chunkPlan {
	if c.procs == 0 {
		c.procs = runtime.GOMAXPROCS(0)
	}
	if c.size == 0 {
		c.size = chunkMin
	}
	if c.parts == 0 {
		c.parts = c.procs * chunksPerProc
	}
	return c
}

// chunk is one stretch of the points array: the elements that start in
// [start, stop).
type chunk struct {
	start, stop int
	hint        int // '{' in [start, stop): at least the elements there
	off         int // its first slot in the shared columns
	cols        pointCols
	end         int  // where its reading stopped: the next element's start, or past ']'
	closed      bool // it read the array's ']'
	ok          bool
}

// sharedCols are the optional columns of a chunked reading, created by
// the first chunk that meets one; every chunk writes its own slots.
type sharedCols struct {
	mu  sync.Mutex
	n   int
	opt [4][]float64
	id  []string
}

func (s *sharedCols) column(k int) []float64 {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.opt[k] == nil {
		s.opt[k] = make([]float64, s.n)
	}
	return s.opt[k]
}

func (s *sharedCols) ids() []string {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.id == nil {
		s.id = make([]string, s.n)
	}
	return s.id
}

// chunkStarts cuts b[first:] into chunks at guessed element
// starts (plan.parts, of plan.size bytes at least); it returns nil when
// the array is too small to share out.
func chunkStarts(b []byte, first int, plan chunkPlan) []int {
	n := len(b) - first
	parts := min(plan.parts, n/plan.size)
	if parts < 2 {
		return nil
	}
	starts := []int{first}
	from := first
	for k := 1; k < parts; k++ {
		from = max(from, first+k*(n/parts))
		s := nextElement(b, from)
		if s < 0 {
			break
		}
		starts = append(starts, s)
		from = s + 1
	}
	if len(starts) < 2 {
		return nil
	}
	return starts
}

// nextElement returns the position of the first '{' at or after from that
// follows a ',' and whitespace, or -1.
func nextElement(b []byte, from int) int {
	for {
		i := bytes.IndexByte(b[from:], ',')
		if i < 0 {
			return -1
		}
		j := from + i + 1
		for j < len(b) && isSpace[b[j]] {
			j++
		}
		if j < len(b) && b[j] == '{' {
			return j
		}
		from = j
	}
}

// parseChunks reads the points array from its first element at pos into
// p.d on every core. done is false, with p untouched, when the array is
// small, there is one core, or anything went wrong; the caller then reads
// it in one pass.
func (p *pointParser) parseChunks() (done bool, err error) {
	plan := p.chunk.plan()
	procs := plan.procs
	if procs < 2 {
		return false, nil
	}
	starts := chunkStarts(p.b, p.pos, plan)
	if starts == nil {
		return false, nil
	}
	chunks := make([]chunk, len(starts))
	for k := range chunks {
		chunks[k].start = starts[k]
		chunks[k].stop = len(p.b)
		if k+1 < len(starts) {
			chunks[k].stop = starts[k+1]
		}
	}
	onEvery(procs, len(chunks), func(k int) {
		c := &chunks[k]
		c.hint = bytes.Count(p.b[c.start:c.stop], []byte{'{'})
	})
	total := 0
	for k := range chunks {
		chunks[k].off = total
		total += chunks[k].hint
	}
	if p.lim.MaxPoints > 0 && total > p.lim.MaxPoints {
		return false, nil // the single pass refuses the entry past the limit, or finds '{' in strings
	}
	x, y := make([]float64, total), make([]float64, total)
	shared := &sharedCols{n: total}
	onEvery(procs, len(chunks), func(k int) {
		c := &chunks[k]
		c.cols = pointCols{x: x[c.off : c.off : c.off+c.hint], y: y[c.off : c.off : c.off+c.hint],
			miss: [4]int{-1, -1, -1, -1}, shared: shared, off: c.off}
		p.readChunk(c)
	})
	last := len(chunks) - 1
	for k := range chunks {
		c := &chunks[k]
		if !c.ok || c.closed != (k == last) || k < last && c.end != chunks[k+1].start || cap(c.cols.x) != c.hint {
			return false, nil
		}
	}
	all := mergeChunks(chunks, x, y, shared)
	p.pos = chunks[last].end
	return true, all.into(p.d)
}

// readChunk reads the elements of c that start before c.stop.
func (p *pointParser) readChunk(c *chunk) {
	q := pointParser{b: p.b, pos: c.start, lim: p.lim}
	for i := 0; ; i++ {
		if q.point(i, &c.cols) != nil {
			return
		}
		q.ws()
		if q.pos >= len(q.b) {
			return
		}
		switch q.b[q.pos] {
		case ',':
			q.pos++
			q.ws()
			if q.pos >= c.stop {
				c.end, c.ok = q.pos, true
				return
			}
		case ']':
			q.pos++
			c.end, c.closed, c.ok = q.pos, true, true
			return
		default:
			return
		}
	}
}

// mergeChunks moves the chunks' points together (needed only where a '{'
// inside a string made a chunk's slots outnumber its points) and finds the
// first point without each optional column, as one pass would have.
func mergeChunks(chunks []chunk, x, y []float64, shared *sharedCols) *pointCols {
	n := 0
	for k := range chunks {
		c := &chunks[k]
		m := len(c.cols.x)
		if n != c.off {
			copy(x[n:], x[c.off:c.off+m])
			copy(y[n:], y[c.off:c.off+m])
			for _, col := range shared.opt {
				if col != nil {
					copy(col[n:], col[c.off:c.off+m])
				}
			}
			if shared.id != nil {
				copy(shared.id[n:], shared.id[c.off:c.off+m])
			}
		}
		n += m
	}
	all := &pointCols{x: x[:n], y: y[:n], miss: [4]int{-1, -1, -1, -1}}
	for k, col := range shared.opt {
		if col == nil {
			continue
		}
		all.opt[k] = col[:n]
		base := 0
		for j := range chunks {
			c := &chunks[j]
			m := len(c.cols.x)
			if c.cols.opt[k] == nil && m > 0 {
				all.miss[k] = base
				break
			}
			if c.cols.miss[k] >= 0 {
				all.miss[k] = base + c.cols.miss[k]
				break
			}
			base += m
		}
	}
	if shared.id != nil {
		all.id = shared.id[:n]
	}
	return all
}

// onEvery calls f(k) for k in [0, n) on up to procs goroutines.
func onEvery(procs, n int, f func(k int)) {
	var next atomic.Int64
	var wg sync.WaitGroup
	for range min(procs, n) {
		wg.Go(func() {
			for {
				k := int(next.Add(1) - 1)
				if k >= n {
					return
				}
				f(k)
			}
		})
	}
	wg.Wait()
}
