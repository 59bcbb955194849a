package wire

import (
	"bytes"
	"runtime"
	"sync"
	"sync/atomic"
)

// Reading the data rows of a plain CSV in parallel. After the header, a
// body in eivfit's own layout (no quote anywhere, '.' decimals, numeric
// columns only, no units row, grouping, skipping or ignored columns) is
// cut into chunks that end at a line break, so that every chunk starts at
// a row. A first pass counts each chunk's lines; the columns are then
// made once, one slot per line, and each chunk parses its rows straight
// from the bytes into its own slots. Comment and blank lines leave slots
// unused, closed up afterwards.
//
// The chunk reader accepts only rows it can read without doubt: any cell
// that is not a number between optional ASCII spaces, a wrong number of
// fields, a byte outside that grammar, too many rows, or no data row at
// all sends the whole body back to the sequential reader, which then
// accepts or refuses it and names the first fault in file order exactly as
// it always has. So both paths answer the same for every body; the chunk
// reader only makes the common valid body fast.

// csvChunkBytes is the size of a chunk; a body below csvParallelBytes is
// read as one chunk on the caller's goroutine.
const (
	csvChunkBytes    = 1 << 20
	csvParallelBytes = 256 << 10
)

// chunkFitRows reads the data rows left in rs into a dataset with the
// columns seen names, or returns nil when the body is for the sequential
// reader (rs is then untouched).
func chunkFitRows(rs *records, lay *layout, seen [7]bool, maxRows int, o *CSVOptions) *Dataset {
	if rs.std != nil || rs.chunk < 0 || !o.plain() || o.decimal() != '.' || lay.group >= 0 || seen[csvIDColumn] || len(rs.body) == 0 {
		return nil
	}
	for _, k := range lay.roles {
		if k < 0 || k == csvIDColumn {
			return nil
		}
	}
	body := rs.body
	size := rs.chunk
	if size == 0 {
		size = csvChunkBytes
		if len(body) < csvParallelBytes {
			size = len(body)
		}
	}
	cuts := chunkCuts(body, size)
	chunks := len(cuts) - 1
	// Slots: each chunk's lines, counted in parallel.
	lines := make([]int, chunks+1)
	forChunks(chunks, func(k int) {
		c := body[cuts[k]:cuts[k+1]]
		lines[k+1] = bytes.Count(c, []byte{'\n'})
		if c[len(c)-1] != '\n' {
			lines[k+1]++
		}
	})
	for k := range chunks {
		lines[k+1] += lines[k] // lines[k] is now chunk k's first slot
	}
	total := lines[chunks]
	// Slots for a few comment or blank lines beyond the row limit; more
	// lines than that go to the row-by-row reader, which counts the rows
	// and names the one past the limit.
	if maxRows > 0 && total > maxRows+maxRows/64+64 {
		return nil
	}
	cols, fields := chunkColumns(seen, lay, total)
	got := make([]int, chunks)
	var failed atomic.Bool
	forChunks(chunks, func(k int) {
		if failed.Load() {
			return
		}
		n, ok := parseChunkRows(body[cuts[k]:cuts[k+1]], rs.comma, fields, lines[k])
		got[k] = n
		if !ok {
			failed.Store(true)
		}
	})
	if failed.Load() {
		return nil
	}
	n := closeUp(&cols, lines, got)
	if n == 0 || (maxRows > 0 && n > maxRows) {
		return nil // the row-by-row reader names the fault
	}
	rows, first := dataLines(body, rs.line, n, total)
	return chunkDataset(cols, n, rows, first)
}

// chunkColumns makes the columns seen names with total slots each, on up
// to GOMAXPROCS goroutines (which share the cost of zeroing them), and
// lists them in the order of lay's fields.
func chunkColumns(seen [7]bool, lay *layout, total int) (cols [7][]float64, fields [][]float64) {
	var roles []int
	for k, s := range seen {
		if s {
			roles = append(roles, k)
		}
	}
	forChunks(len(roles), func(j int) { cols[roles[j]] = make([]float64, total) })
	fields = make([][]float64, len(lay.roles))
	for j, k := range lay.roles {
		fields[j] = cols[k]
	}
	return cols, fields
}

// closeUp closes the slots of comment and blank lines: chunk k's got[k]
// rows, read into the slots from first[k] on, move to follow the rows of
// the chunks before it. It returns the number of rows.
func closeUp(cols *[7][]float64, first, got []int) int {
	n := 0
	for k, g := range got {
		if from := first[k]; from != n {
			for _, c := range cols {
				if c != nil {
					copy(c[n:], c[from:from+g])
				}
			}
		}
		n += g
	}
	return n
}

// chunkDataset is the dataset of the first n slots of cols, whose rows
// are on the lines rows (nil: first, first+1, …).
func chunkDataset(cols [7][]float64, n int, rows []int, first int) *Dataset {
	d := &Dataset{csv: true, rows: rows, firstRow: first}
	d.X, d.Y, d.SX, d.SY, d.R, d.Order = cut(cols[0], n), cut(cols[1], n), cut(cols[2], n), cut(cols[3], n), cut(cols[4], n), cut(cols[6], n)
	return d
}

func cut(c []float64, n int) []float64 {
	if c == nil {
		return nil
	}
	return c[:n:n]
}

// chunkCuts splits b into pieces of about size bytes, each but the last
// ending with a line break: the offsets where they start, then len(b).
func chunkCuts(b []byte, size int) []int {
	size = max(size, 1)
	cuts := make([]int, 1, len(b)/size+2)
	for start := 0; start < len(b); {
		end := start + size
		if end >= len(b) {
			end = len(b)
		} else if i := bytes.IndexByte(b[end-1:], '\n'); i < 0 {
			end = len(b)
		} else {
			end += i
		}
		cuts = append(cuts, end)
		start = end
	}
	return cuts
}

// forChunks runs f(0) … f(n-1) on up to GOMAXPROCS goroutines (the
// caller's among them), each taking the next chunk as it finishes one.
func forChunks(n int, f func(k int)) {
	workers := chunkWorkers(n)
	if workers <= 1 {
		for k := range n {
			f(k)
		}
		return
	}
	var next atomic.Int64
	work := func() {
		for {
			k := int(next.Add(1) - 1)
			if k >= n {
				return
			}
			f(k)
		}
	}
	var wg sync.WaitGroup
	for range workers - 1 {
		wg.Go(work)
	}
	work()
	wg.Wait()
}

// chunkWorkers is the number of goroutines forChunks runs n chunks on.
func chunkWorkers(n int) int { return max(min(runtime.GOMAXPROCS(0), n), 1) }

// dataLines gives the lines of the n data rows of body, whose first line
// is line+1: nil and the first row's line when they are consecutive (no
// comment or blank line between them: the common case, in which no list
// is made), else the list, found by skipping lines as parseChunkRows does.
func dataLines(body []byte, line, n, lines int) ([]int, int) {
	if n == lines {
		return nil, line + 1 // every line a data row
	}
	var rows []int // made at the first gap after the first data row
	first, k := 0, 0
	for i := 0; i < len(body) && k < n; {
		line++
		if next, skip := skipLine(body, i); skip {
			i = next
			continue
		}
		if first == 0 {
			first = line
		}
		if rows == nil && line != first+k {
			rows = make([]int, k, n)
			for r := range rows {
				rows[r] = first + r
			}
		}
		if rows != nil {
			rows = append(rows, line)
		}
		k++
		if j := bytes.IndexByte(body[i:], '\n'); j >= 0 {
			i += j + 1
		} else {
			i = len(body)
		}
	}
	if rows == nil {
		return nil, first
	}
	return rows, 0
}

// skipLine says whether the line at b[i] is one records.next skips: empty
// (after one trailing '\r') or a comment; next is the start of the line
// after it.
func skipLine(b []byte, i int) (next int, skip bool) {
	switch c := b[i]; {
	case c == '\n':
		return i + 1, true
	case c == '#':
		if j := bytes.IndexByte(b[i:], '\n'); j >= 0 {
			return i + j + 1, true
		}
		return len(b), true
	case c == '\r' && (i+1 == len(b) || b[i+1] == '\n'):
		return min(i+2, len(b)), true
	}
	return i, false
}

// hasQuote says whether b holds a '"', looking at parts of a large body
// in parallel.
func hasQuote(b []byte) bool {
	if len(b) < csvParallelBytes {
		return bytes.IndexByte(b, '"') >= 0
	}
	cuts := chunkCutsAnywhere(len(b), csvChunkBytes)
	var found atomic.Bool
	forChunks(len(cuts)-1, func(k int) {
		if !found.Load() && bytes.IndexByte(b[cuts[k]:cuts[k+1]], '"') >= 0 {
			found.Store(true)
		}
	})
	return found.Load()
}

// chunkCutsAnywhere splits n bytes into pieces of size bytes (the last
// shorter): the offsets where they start, then n.
func chunkCutsAnywhere(n, size int) []int {
	cuts := make([]int, 0, n/size+2)
	for start := 0; start < n; start += size {
		cuts = append(cuts, start)
	}
	return append(cuts, n)
}

// csvSpace is the ASCII white space bytes.TrimSpace removes from a cell
// (a line break ends the row instead).
var csvSpace = [256]bool{' ': true, '\t': true, '\v': true, '\f': true, '\r': true}

// parseChunkRows reads the rows of chunk b into slots from..:
// fields[j][slot] for the j-th field (dataLines finds their lines). It
// returns the number of rows read, and false at the first
// line it cannot read without doubt (the sequential reader decides).
// Lines are skipped as records.next skips them: empty (after one trailing
// '\r') or starting with '#'.
func parseChunkRows(b []byte, comma byte, fields [][]float64, from int) (int, bool) {
	i, n, slot := 0, len(b), from
	last := len(fields) - 1
	for i < n {
		if c := b[i]; c == '\n' || c == '#' || c == '\r' {
			if next, skip := skipLine(b, i); skip {
				i = next
				continue
			}
		}
		for j, col := range fields {
			for i < n && csvSpace[b[i]] && b[i] != comma {
				i++
			}
			v, end, ok := scanFloat(b, i)
			if !ok {
				return slot - from, false
			}
			i = end
			// Most cells end at their delimiter: a comma, or the line
			// break after the last.
			if i < n && (j < last && b[i] == comma || j == last && b[i] == '\n') {
				i++
				col[slot] = v
				continue
			}
			for i < n && csvSpace[b[i]] && b[i] != comma {
				i++
			}
			switch {
			case j < last:
				if i == n || b[i] != comma {
					return slot - from, false
				}
			case i < n && b[i] != '\n':
				return slot - from, false
			}
			i++
			col[slot] = v
		}
		slot++
	}
	return slot - from, true
}
