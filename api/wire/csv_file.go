package wire

import (
	"bytes"
	"errors"
	"io"
	"sync"
	"sync/atomic"
)

// Reading a large fit CSV file in parallel parts, straight from the file.
// The whole-body reader (csv_chunks.go) needs the file in memory: a buffer
// of its size, whose pages the kernel must fault in and fill before any
// number is read, and which the line count and the parse then read again.
// DecodeCSVAt reads each chunk of the file once, into a buffer of the core
// that parses it, and parses it there while it is in the processor's cache:
// a chunk starts after the first line break at or after its nominal start
// less one byte (a line that starts exactly there is its), and ends after
// the first line break at or after the next chunk's nominal start less one
// byte, which it reads a little past its nominal end to find. As soon as a
// chunk is read its lines are counted and published; it then waits only
// for the counts of the chunks before it (published as soon as those are
// read, not parsed), which place its rows in the columns: one slot a line,
// as the chunk reader makes them. The columns are made once, sized from
// the lines per byte of the file's first chunk with a margin; when the file
// holds more lines than that, the chunks only count, and a second round
// reads them again into columns of the exact size. Only the columns and a
// buffer a core are held.
//
// It reads only what the chunk reader reads without doubt, and nothing
// else: a header it cannot stream (the streaming reader's conditions), a
// quote anywhere, a line longer than fileLineSlack at a chunk's end, any
// row parseChunkRows refuses, too many rows, a file that changed size
// while it was read, or a read error all answer "not read" (ok false), and
// the caller reads the file whole and decodes it as before
// (DecodeCSVGroups), which names the fault. So the answer is the whole
// reader's for every file.

// DecodeCSVAt reads the fit CSV of size bytes that r holds (a file), in
// the dialect of o, as DecodeCSVGroups would read its bytes: the groups or
// the problem DecodeCSVGroups would give; or it says (ok false) that the
// file is to be read whole and decoded by DecodeCSVGroups. Rows are
// counted against DefaultLimits.
func DecodeCSVAt(r io.ReaderAt, size int64, o *CSVOptions) (groups []CSVGroup, ok bool, err error) {
	return decodeCSVAt(r, size, o, DefaultLimits.MaxPoints, fileChunkBytes)
}

func decodeCSVAt(r io.ReaderAt, size int64, o *CSVOptions, maxRows, chunk int) ([]CSVGroup, bool, error) {
	if size <= 0 || !o.plain() || o.decimal() != '.' {
		return nil, false, nil
	}
	head := make([]byte, min(size, int64(max(chunk, 64<<10))))
	if !readAt(r, head, 0) {
		return nil, false, nil
	}
	start := int64(len(head) - len(bytes.TrimPrefix(head, []byte("\xef\xbb\xbf"))))
	complete := head[start:]
	if int64(len(head)) < size {
		nl := int64(bytes.LastIndexByte(head, '\n') + 1)
		if nl <= start {
			return nil, false, nil // the header is longer than the first chunk
		}
		complete = head[start:nl]
	}
	h, ok, _ := chunkHeader(complete, o)
	if !ok {
		return nil, false, nil // no header in the first chunk, or not the chunk reader's: the whole reader says
	}
	f := &fileRows{r: r, from: start + int64(h.end), size: size, chunk: chunk, h: h}
	if maxRows > 0 {
		// Slots for a few comment or blank lines beyond the row limit, as
		// the chunk reader allows.
		f.limit = maxRows + maxRows/64 + 64
	}
	est, ok := f.estimate(complete[h.end:], int64(len(head)) == size)
	if !ok {
		return nil, false, nil
	}
	res, ok := f.read(est)
	if ok && res.overflow && (f.limit == 0 || res.total <= f.limit) {
		res, ok = f.read(res.total) // more lines than estimated: exactly sized now
	}
	if !ok || res.overflow || !sameSize(r, size) {
		return nil, false, nil
	}
	n := closeUp(&res.cols, res.firsts, res.got)
	if n == 0 || maxRows > 0 && n > maxRows {
		return nil, false, nil // the whole reader names the fault
	}
	list, first := joinRows(res.rows, res.got, n)
	groups, err := finishFitCSV([]CSVGroup{{Data: chunkDataset(res.cols, n, list, first)}}, h.lay, nil)
	return groups, true, err
}

// fileChunkBytes is the nominal size of a chunk of the file: small enough
// for a chunk and its rows' slots to stay in a core's cache between its
// read and its parse.
const fileChunkBytes = 256 << 10

// fileLineSlack is how far past its nominal end a chunk is read to find
// the end of its last line; a longer line there leaves the file to the
// whole read.
const fileLineSlack = 4 << 10

// fileRows reads the data rows of a file, from its offset from to size,
// under header h, in chunks of chunk bytes; limit is the most lines it
// takes (0: no limit).
type fileRows struct {
	r          io.ReaderAt
	from, size int64
	chunk      int
	h          rowsHeader
	limit      int
}

// estimate is the number of slots to make: the lines per byte of data
// (the file's first complete lines after the header) times the data's
// bytes, with a quarter to spare; exact when data is all of them (whole).
// ok is false when data holds no line.
func (f *fileRows) estimate(data []byte, whole bool) (int, bool) {
	lines := bytes.Count(data, []byte{'\n'})
	if whole && len(data) > 0 && data[len(data)-1] != '\n' {
		lines++ // the file's last line, unfinished
	}
	if lines == 0 {
		return 0, false
	}
	est := lines
	if !whole {
		est = int(float64(f.size-f.from)*float64(lines)/float64(len(data))*1.25) + 1024
	}
	if f.limit > 0 {
		est = min(est, f.limit+1)
	}
	return est, true
}

// fileRound is one round of reading a file's rows: the columns, chunk k's
// first slot firsts[k] (then the total), its rows read got[k] and their
// lines; overflow when the file has more lines than the columns have slots
// (nothing was parsed then, only counted).
type fileRound struct {
	cols     [7][]float64
	firsts   []int
	got      []int
	rows     []chunkRows
	total    int
	overflow bool
}

// read reads the rows into columns of est slots, each chunk on a core of
// its own; ok is false on any doubt.
func (f *fileRows) read(est int) (fileRound, bool) {
	chunks := int((f.size - f.from + int64(f.chunk) - 1) / int64(f.chunk))
	var res fileRound
	var fields [][]float64
	res.cols, fields = chunkColumns(f.h.seen, f.h.lay, est)
	res.firsts, res.got, res.rows = make([]int, chunks+1), make([]int, chunks), make([]chunkRows, chunks)
	// The counts published so far: every chunk below ready has its first
	// slot in firsts.
	counts, known := make([]int, chunks), make([]bool, chunks)
	ready, failed := 0, false
	var mu sync.Mutex
	published := sync.NewCond(&mu)
	// publish records chunk k's line count n (n < 0: chunk k failed) and
	// waits for the counts before it; it returns k's first slot, or false
	// once any chunk has failed.
	publish := func(k, n int) (int, bool) {
		mu.Lock()
		defer mu.Unlock()
		if n < 0 {
			failed = true
		} else {
			counts[k], known[k] = n, true
		}
		for ready < chunks && known[ready] {
			res.firsts[ready+1] = res.firsts[ready] + counts[ready]
			ready++
		}
		published.Broadcast()
		for ready < k && !failed {
			published.Wait()
		}
		return res.firsts[k], !failed
	}
	var overflow atomic.Bool
	bufs := make(chan []byte, chunkWorkers(chunks)) // one a goroutine: never full
	forChunks(chunks, func(k int) {
		var buf []byte
		select {
		case buf = <-bufs:
		default:
			buf = make([]byte, f.chunk+1+fileLineSlack)
		}
		defer func() { bufs <- buf }()
		seg, ok := f.chunkAt(k, chunks, buf)
		if !ok {
			publish(k, -1)
			return
		}
		n := bytes.Count(seg, []byte{'\n'})
		if len(seg) > 0 && seg[len(seg)-1] != '\n' {
			n++ // the file's last line, unfinished
		}
		first, ok := publish(k, n)
		if !ok {
			return
		}
		if first+n > est {
			overflow.Store(true)
		}
		if overflow.Load() {
			return // only counting now, for the second round
		}
		got, ok := parseChunkRows(seg, f.h.comma, fields, first)
		res.got[k] = got
		// The lines of the rows, while the chunk is at hand (none is
		// listed when they are consecutive).
		res.rows[k].list, res.rows[k].first = dataLines(seg, f.h.line+first, got, n)
		if !ok {
			publish(k, -1)
		}
	})
	if failed {
		return res, false
	}
	res.total, res.overflow = res.firsts[chunks], overflow.Load()
	return res, true
}

// chunkAt reads chunk k of chunks into buf and returns its bytes: from
// after the first line break at or after its nominal start less one byte
// to after the first at or after the next chunk's nominal start less one
// byte (empty when both are the same line break, or past the end: the
// chunk lies inside one line). ok is false when the read fails, a quote is
// found, or a line is too long to find its end.
func (f *fileRows) chunkAt(k, chunks int, buf []byte) ([]byte, bool) {
	nominal := f.from + int64(k)*int64(f.chunk)
	lo, hi := nominal, f.size
	if k > 0 {
		lo--
	}
	if k < chunks-1 {
		hi = min(nominal+int64(f.chunk)+fileLineSlack, f.size)
	}
	b := buf[:hi-lo]
	if !readAt(f.r, b, lo) {
		return nil, false
	}
	start := 0
	if k > 0 {
		i := bytes.IndexByte(b, '\n')
		if i < 0 {
			// Inside the file's last line, unfinished: the chunk before
			// ends with it. Any other line this long is the whole read's.
			return nil, hi == f.size
		}
		start = i + 1
	}
	end := len(b)
	if k < chunks-1 {
		// The first line break at or after the next chunk's nominal start
		// less one byte: the one start follows when that is at or past it
		// (the chunk is then empty).
		e := int(nominal + int64(f.chunk) - 1 - lo)
		switch j := bytes.IndexByte(b[e:], '\n'); {
		case j >= 0:
			end = e + j + 1
		case hi < f.size:
			return nil, false // a line longer than the slack at the chunk's end
		}
	}
	seg := b[start:end]
	return seg, bytes.IndexByte(seg, '"') < 0
}

// chunkRows are the lines of a chunk's rows as dataLines gives them: a
// list, or the first of consecutive lines.
type chunkRows struct {
	list  []int
	first int
}

// joinRows gives the lines of all n rows from the chunks' (got[k] rows
// each): nil and the first row's line when they are consecutive, else the
// list.
func joinRows(rows []chunkRows, got []int, n int) ([]int, int) {
	first, next := 0, 0 // next: the line the next row has if consecutive
	consecutive := true
	for k, c := range rows {
		if got[k] == 0 {
			continue
		}
		if c.list != nil || next != 0 && c.first != next {
			consecutive = false
			break
		}
		if first == 0 {
			first = c.first
		}
		next = c.first + got[k]
	}
	if consecutive {
		return nil, first
	}
	list := make([]int, 0, n)
	for k, c := range rows {
		if c.list != nil {
			list = append(list, c.list...)
			continue
		}
		for i := range got[k] {
			list = append(list, c.first+i)
		}
	}
	return list, 0
}

// readAt fills b from r at off; false on any error or a short read.
func readAt(r io.ReaderAt, b []byte, off int64) bool {
	n, err := r.ReadAt(b, off)
	return n == len(b) && (err == nil || errors.Is(err, io.EOF))
}

// sameSize says whether r still ends at size: nothing was appended while
// it was read.
func sameSize(r io.ReaderAt, size int64) bool {
	var b [1]byte
	n, err := r.ReadAt(b[:], size)
	return n == 0 && errors.Is(err, io.EOF)
}
