package wire

import (
	"bytes"
	"errors"
	"io"
	"sync/atomic"
)

// Reading a large fit CSV file in parallel parts, straight from the file.
// The whole-body reader (csv_chunks.go) needs the file in memory: a buffer
// of its size, whose pages the kernel must fault in and fill before any
// number is read, and which the line count and the parse then read again
// from memory. DecodeCSVAt instead reads the file twice through small
// buffers, each part on its own core: a first pass finds where each chunk's
// first line starts and counts its lines (so that the columns are made once,
// one slot per line, as the chunk reader makes them); a second reads each
// chunk again, while it is still in the file cache, and parses its rows into
// its slots while they are in the processor's cache. Only the columns and a
// buffer a core are held.
//
// It reads only what the chunk reader reads without doubt, and nothing
// else: a header it cannot stream (the streaming reader's conditions), a
// quote anywhere, a line longer than a chunk, any row parseChunkRows
// refuses, too many rows, a file that changed size while it was read, or
// a read error all answer "not read"
// (ok false), and the caller reads the file whole and decodes it as before
// (DecodeCSVGroups), which names the fault. So the answer is the whole
// reader's for every file.

// fileChunkBytes is the size of a chunk of the file: small enough for a
// chunk and its rows' slots to stay in a core's cache between its read and
// its parse.
const fileChunkBytes = 256 << 10

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
	p, ok := planFile(r, start+int64(h.end), size, chunk)
	// Slots for a few comment or blank lines beyond the row limit, as the
	// chunk reader allows.
	if !ok || maxRows > 0 && p.total > maxRows+maxRows/64+64 {
		return nil, false, nil
	}
	cols, fieldCols := chunkColumns(h.seen, h.lay, p.total)
	chunks := len(p.cuts) - 1
	got := make([]int, chunks)
	rows := make([]chunkRows, chunks)
	span := func(k int) (int64, int64) { return p.cuts[k], p.cuts[k+1] }
	read := readChunks(r, chunks, 2*chunk, span, func(k int, b []byte, _ int64) bool {
		n, ok := parseChunkRows(b, h.comma, fieldCols, p.lines[k])
		got[k] = n
		// The lines of the rows, while the chunk is at hand (none is
		// listed when they are consecutive).
		rows[k].list, rows[k].first = dataLines(b, h.line+p.lines[k], n, p.lines[k+1]-p.lines[k])
		return ok
	})
	if !read || !sameSize(r, size) {
		return nil, false, nil
	}
	n := closeUp(&cols, p.lines, got)
	if n == 0 || maxRows > 0 && n > maxRows {
		return nil, false, nil // the whole reader names the fault
	}
	list, first := joinRows(rows, got, n)
	groups, err := finishFitCSV([]CSVGroup{{Data: chunkDataset(cols, n, list, first)}}, h.lay, nil)
	return groups, true, err
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

// filePlan is where a file's data chunks start (then the file's size) and
// the lines before each (then the total): one slot a line.
type filePlan struct {
	cuts  []int64
	lines []int
	total int
}

// planFile cuts the data from..size of r into chunks of about chunk bytes
// that each start at a line, and counts their lines, each chunk read on a
// core of its own. ok is false when a chunk holds no line break (a line
// longer than a chunk), a quote, or cannot be read.
func planFile(r io.ReaderAt, from, size int64, chunk int) (filePlan, bool) {
	chunks := int((size - from + int64(chunk) - 1) / int64(chunk))
	p := filePlan{cuts: make([]int64, chunks+1), lines: make([]int, chunks+1)}
	p.cuts[0], p.cuts[chunks] = from, size
	// Chunk k starts after the first line break at or after its nominal
	// start less one byte (a line that starts exactly there belongs to
	// it), and ends where chunk k+1 starts.
	span := func(k int) (int64, int64) {
		lo, hi := from+int64(k)*int64(chunk), min(from+int64(k+1)*int64(chunk), size)
		if k > 0 {
			lo--
		}
		return lo, hi
	}
	read := readChunks(r, chunks, chunk+1, span, func(k int, b []byte, lo int64) bool {
		if bytes.IndexByte(b, '"') >= 0 {
			return false
		}
		if k > 0 {
			i := bytes.IndexByte(b, '\n')
			switch {
			case i < 0 && k == chunks-1:
				// Inside the file's last line, unfinished: the chunk
				// before ends with it, and this one is empty.
				p.cuts[k] = size
				return true
			case i < 0:
				return false // a line longer than a chunk
			}
			p.cuts[k] = lo + int64(i) + 1
			b = b[i+1:]
		}
		// The lines that start in this chunk: its line breaks before the
		// next chunk's nominal start less one byte, and the one at or after
		// that which ends its last line (or the file's unfinished last
		// line). A chunk inside a line longer than a chunk has none.
		n := 0
		switch {
		case k < chunks-1 && len(b) > 0:
			n = bytes.Count(b[:len(b)-1], []byte{'\n'}) + 1
		case k == chunks-1:
			n = bytes.Count(b, []byte{'\n'})
			if len(b) > 0 && b[len(b)-1] != '\n' {
				n++
			}
		}
		p.lines[k+1] = n
		return true
	})
	if !read {
		return p, false
	}
	for k := range chunks {
		p.lines[k+1] += p.lines[k]
	}
	p.total = p.lines[chunks]
	return p, true
}

// readChunks reads span(k) of r for each of chunks chunks, on up to
// GOMAXPROCS goroutines, each into a buffer of its own (of bufSize bytes,
// or a chunk's size if larger) that it reuses, and hands it to f. It
// returns false when a read or f fails (the chunks left are then
// skipped).
func readChunks(r io.ReaderAt, chunks, bufSize int, span func(k int) (lo, hi int64), f func(k int, b []byte, lo int64) bool) bool {
	var failed atomic.Bool
	bufs := make(chan []byte, chunkWorkers(chunks)) // one a goroutine: never full
	forChunks(chunks, func(k int) {
		if failed.Load() {
			return
		}
		var buf []byte
		select {
		case buf = <-bufs:
		default:
		}
		lo, hi := span(k)
		if n := int(hi - lo); cap(buf) < n {
			buf = make([]byte, n, max(n, bufSize))
		}
		b := buf[:hi-lo]
		if !readAt(r, b, lo) || !f(k, b, lo) {
			failed.Store(true)
		}
		bufs <- buf
	})
	return !failed.Load()
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
