package wire

import (
	"bytes"
	"io"
	"net/url"

	"eivfit/api/internal/bufpool"
)

// Reading a fit CSV while its body arrives. The server hands the stream
// each block as it is read (Room, then Got); the stream cuts the block at
// its last line break, parses the complete lines straight into columns
// that grow (sized from the declared length and the bytes per line seen so
// far, so that a large body is sized about once), carries the partial line
// to the next block and drops the rest. The body itself is never held.
//
// The stream takes the same rows as the chunk reader (csv_chunks.go) and
// nothing else:
//   - a header it cannot stream (a quote before or in it, options or
//     columns the chunk reader leaves to the row-by-row reader, or any fault)
//     makes it keep the whole body and decode it after the last byte as
//     DecodeCSVWith does;
//   - at the first doubtful line (one parseChunkRows refuses, or the row
//     past the limit) it keeps the rest of the body from the start of that
//     line, and when the body is complete resumes the row-by-row reader
//     there (fitRows) with the points taken so far and the line count
//     before it.
//
// Why the resumed reader answers exactly as the whole-body reader: every
// line before the resume point is a data row the chunk reader accepts
// (no quote in it), a blank line or a comment, which both the plain scan
// and encoding/csv skip whole, quotes and all; so the row-by-row reader
// takes the same numbers from them, refuses none and lists nothing as
// missing, and after such a line it is (plain scan or encoding/csv, chosen
// by whether a quote follows) in the state it has at the start of a body.
// Its first fault is therefore at or after the resume point, named with
// the line count carried over (records.base).
// Decoding errors wait for the whole body, so that a body over the limit or
// too slow is answered as before (413, 408).

// CSVStream decodes a plain fit CSV as it arrives (see above).
type CSVStream struct {
	o        *CSVOptions
	maxRows  int
	hint     int64 // the declared length, or -1
	received int64
	mode     streamMode

	// buf holds the unparsed bytes (a partial line, or the header not yet
	// complete), then room for the next read. It and kept are the stream's
	// own buffers, from bufpool up to its largest class; Release gives
	// them back.
	buf []byte

	lay      *layout
	seen     [7]bool
	comma    byte
	cols     [7][]float64 // slots: len is the room made, n are taken
	fields   [][]float64
	n        int
	line     int // lines before buf
	consumed int64
	firstRow int   // the first row's line while the rows are consecutive
	rows     []int // the rows' lines, once they are not

	// kept is the whole body (keepWhole) or the body from the resume
	// point (keepRest).
	kept []byte
}

type streamMode int8

const (
	inHeader streamMode = iota
	inRows
	keepWhole
	keepRest
)

// streamBlock is the smallest room a stream keeps for a block, unless the
// body is shorter: a declared length needs at most its own size and a
// byte; a body without one starts at a block of twice what has arrived
// (at least 4 KiB) and doubles. A line longer than that grows it.
const streamBlock = 512 << 10

// NewCSVStream starts a stream of a fit CSV in the dialect of o, with
// the row limit of lim (nil: DefaultLimits) and the declared length (-1
// when unknown).
func NewCSVStream(o *CSVOptions, lim *Limits, declared int64) *CSVStream {
	if lim == nil {
		lim = &DefaultLimits
	}
	return &CSVStream{o: o, maxRows: lim.MaxPoints, hint: declared}
}

// Len is the number of bytes received.
func (s *CSVStream) Len() int64 { return s.received }

// Room returns k bytes to read the next bytes of the body into; Got says
// how many were read.
func (s *CSVStream) Room(k int) []byte {
	if s.mode >= keepWhole {
		s.kept = bufpool.Grow(s.kept, k)
		return s.kept[len(s.kept) : len(s.kept)+k]
	}
	if cap(s.buf)-len(s.buf) < k {
		size := max(streamBlock, 2*cap(s.buf))
		if s.hint >= 0 {
			size = min(size, int(s.hint)+1)
		} else {
			size = min(size, max(2*int(s.received+int64(k)), 4<<10))
		}
		s.buf = bufpool.Grow(s.buf, max(size, len(s.buf)+k)-len(s.buf))
	}
	return s.buf[len(s.buf) : len(s.buf)+k]
}

// Got takes the k bytes just read into Room's slice.
func (s *CSVStream) Got(k int) {
	s.received += int64(k)
	switch s.mode {
	case keepWhole, keepRest:
		s.kept = s.kept[:len(s.kept)+k]
	default:
		s.buf = s.buf[:len(s.buf)+k]
		if bytes.IndexByte(s.buf[len(s.buf)-k:], '\n') < 0 {
			return // no line completed (a long line is not scanned again)
		}
		if s.mode == inHeader {
			s.header(false)
		} else {
			s.take(false)
		}
	}
}

// Finish decodes what is left once the body is complete: the dataset, or
// the problem the row-by-row reader names. It releases the stream's
// buffers: the dataset and the problems hold copies of what they took from
// the bytes (numbers, and strings made from them).
func (s *CSVStream) Finish() (*Dataset, error) {
	defer s.Release()
	if s.mode == inHeader {
		s.header(true)
	}
	if s.mode == inRows {
		s.take(true)
	}
	switch s.mode {
	case keepWhole:
		body := bytes.TrimPrefix(s.kept, []byte("\xef\xbb\xbf"))
		return firstGroup(decodeFitCSV(newRecords(body, s.o), s.maxRows, s.o))
	case inRows:
		if s.n > 0 {
			d := &Dataset{csv: true, rows: s.rows, firstRow: s.firstRow}
			if s.rows != nil {
				d.firstRow = 0
			}
			d.X, d.Y, d.SX, d.SY, d.R, d.Order = s.col(0), s.col(1), s.col(2), s.col(3), s.col(4), s.col(6)
			return firstGroup(finishFitCSV([]CSVGroup{{Data: d}}, s.lay, nil))
		}
		s.resume(nil) // no data row: the row-by-row reader says what is wrong
	}
	// keepRest: the points so far, then the row-by-row reader.
	d := &Dataset{csv: true, rows: s.rows}
	if d.rows == nil {
		d.rows = make([]int, s.n, s.n+s.n/64+16)
		for i := range d.rows {
			d.rows[i] = s.firstRow + i
		}
	}
	for k, c := range s.cols {
		switch {
		case c != nil:
			c = c[:s.n]
		case s.seen[k]:
			c = []float64{} // a column named but no row read yet
		}
		if col := d.column(k); col != nil {
			*col = c
		}
	}
	rs := newRecords(s.kept, s.o)
	rs.chunk, rs.line, rs.base = -1, s.line, s.line
	return firstGroup(fitRows(rs, s.lay, s.seen, s.maxRows, s.o, d))
}

// Release gives the stream's buffers back to the pool (once: it may be
// called again, and after Finish) and lets go of the columns, which a
// finished stream has handed over. Nothing may read a block Room gave out
// after it.
func (s *CSVStream) Release() {
	bufpool.Put(s.buf)
	bufpool.Put(s.kept)
	s.buf, s.kept = nil, nil
	s.cols, s.fields, s.rows = [7][]float64{}, nil, nil
}

// col is column k of the points taken, without spare room.
func (s *CSVStream) col(k int) []float64 {
	if s.cols[k] == nil {
		return nil
	}
	return s.cols[k][:s.n:s.n]
}

// header reads the header once its line is complete (or the body has
// ended) and decides whether the rows can be streamed.
func (s *CSVStream) header(eof bool) {
	body := s.buf
	if len(body) < 3 && !eof {
		return // the byte-order mark is not yet known
	}
	body = bytes.TrimPrefix(body, []byte("\xef\xbb\xbf"))
	complete := body
	if !eof {
		complete = body[:bytes.LastIndexByte(body, '\n')+1]
	}
	h, ok, more := chunkHeader(complete, s.o)
	if more && !eof {
		if len(complete) > 2*streamBlock {
			s.keepAll() // a long preamble is not scanned again at every block
		}
		return // only comments and blank lines so far
	}
	if !ok {
		s.keepAll()
		return
	}
	s.lay, s.seen, s.comma, s.line, s.mode = h.lay, h.seen, h.comma, h.line, inRows
	s.consumed = int64(len(s.buf) - len(body) + h.end)
	s.buf = s.buf[:copy(s.buf, body[h.end:])]
	s.take(eof)
}

// rowsHeader is a header under which the chunk reader reads the rows:
// its layout, the columns it names, its line, the offset of the rows in
// the body, and the delimiter.
type rowsHeader struct {
	lay   *layout
	seen  [7]bool
	line  int
	end   int
	comma byte
}

// chunkHeader reads the header at the start of body (after any comment
// and blank lines; body holds complete lines) in the dialect of o. ok is
// false when the rows under it are not the chunk reader's (a quote in or
// before it, a fault, options or columns it leaves to the row-by-row
// reader, or no header); more is true when body holds no header yet.
func chunkHeader(body []byte, o *CSVOptions) (h rowsHeader, ok, more bool) {
	rs := &records{body: body, comma: o.comma()}
	fields, line, err := rs.next()
	if err != nil {
		return h, false, err == io.EOF
	}
	h.end, h.line, h.comma = len(body)-len(rs.body), line, rs.comma
	if bytes.IndexByte(body[:h.end], '"') >= 0 {
		return h, false, false
	}
	if h.lay, err = readHeader(fields, line, o, func(k string) int { return indexOf(csvColumns, k) }, fitRoleIndex, ""); err != nil {
		return h, false, false
	}
	h.seen, ok = streamable(o, h.lay)
	return h, ok, false
}

// streamable says whether the rows under header lay, in the dialect of o,
// are read as the chunk reader reads them (chunkFitRows's conditions), and
// which columns lay names.
func streamable(o *CSVOptions, lay *layout) (seen [7]bool, ok bool) {
	if !o.plain() || o.decimal() != '.' || lay.group >= 0 {
		return seen, false
	}
	for _, k := range lay.roles {
		if k < 0 || k == csvIDColumn || seen[k] {
			return seen, false
		}
		seen[k] = true
	}
	return seen, seen[0] && seen[1]
}

// keepAll gives up streaming before any row: the whole body is kept.
func (s *CSVStream) keepAll() {
	s.mode = keepWhole
	s.kept = s.buf
	if s.hint >= 0 && int64(cap(s.kept)) < s.hint+1 {
		s.kept = append(bufpool.Ahead(int(s.hint)+1), s.buf...)
		bufpool.Put(s.buf)
	}
	s.buf = nil
}

// resume stops streaming at rest, the body from the doubtful line on:
// the rest of the body is kept for the row-by-row reader.
func (s *CSVStream) resume(rest []byte) {
	s.mode = keepRest
	size := int64(len(rest))
	if s.hint >= 0 {
		size += max(s.hint-s.received, 0) + 1
	}
	s.kept = append(bufpool.Ahead(int(size)), rest...)
	bufpool.Put(s.buf) // rest, a slice of it, is copied
	s.buf = nil
}

// take parses the complete lines in buf (all of it at the end of the
// body) into the columns, carries the partial line, and resumes at the
// first doubtful line.
func (s *CSVStream) take(eof bool) {
	seg := s.buf
	if !eof {
		seg = seg[:bytes.LastIndexByte(seg, '\n')+1]
	}
	if len(seg) == 0 {
		return
	}
	lines := bytes.Count(seg, []byte{'\n'})
	if len(seg) > 0 && seg[len(seg)-1] != '\n' {
		lines++
	}
	s.room(lines, int64(len(seg)))
	got, ok := parseChunkRows(seg, s.comma, s.fields, s.n)
	doubt := !ok
	if s.maxRows > 0 && s.n+got > s.maxRows {
		got, doubt = s.maxRows-s.n, true
	}
	off, offLines := len(seg), lines
	if doubt {
		off, offLines = afterRows(seg, got)
	}
	s.note(seg[:off], got, offLines)
	s.n += got
	s.line += offLines
	s.consumed += int64(off)
	if doubt {
		s.resume(s.buf[off:])
		return
	}
	s.buf = s.buf[:copy(s.buf, s.buf[off:])]
}

// room makes slots for lines more rows, about once for the whole body:
// the rows still to come are estimated from the bytes per line so far and
// the declared length (doubling when no length was declared). The columns
// made ahead of the rows received never take more bytes than the declared
// length, as the whole body's buffer did (an upload that stalls after its
// first block holds no more than before); only bodies of very short rows
// grow them again.
func (s *CSVStream) room(lines int, segBytes int64) {
	need := s.n + lines
	have := len(s.cols[0])
	if need <= have {
		return
	}
	size := max(need, 2*have)
	if s.hint >= 0 {
		done := s.consumed + segBytes
		perLine := float64(done) / float64(s.line+lines)
		est := need + int(float64(max(s.hint-done, 0))/perLine*1.01) + 64
		cols := 0
		for _, seen := range s.seen {
			if seen {
				cols++
			}
		}
		size = max(need, min(est, max(int(s.hint)/(8*cols), 2*have)))
	}
	if s.maxRows > 0 {
		size = min(size, max(need, s.maxRows+1))
	}
	s.fields = s.fields[:0]
	for k, seen := range s.seen {
		if seen {
			c := make([]float64, size)
			copy(c, s.cols[k][:s.n])
			s.cols[k] = c
		}
	}
	for _, k := range s.lay.roles {
		s.fields = append(s.fields, s.cols[k])
	}
}

// note records the lines of the rows just taken from seg (whose first
// line is s.line+1): a first line while they are consecutive, else a list.
func (s *CSVStream) note(seg []byte, got, lines int) {
	if got == 0 {
		return
	}
	rows, first := dataLines(seg, s.line, got, lines)
	if s.rows == nil && rows == nil && (s.n == 0 || first == s.firstRow+s.n) {
		if s.n == 0 {
			s.firstRow = first
		}
		return
	}
	if s.rows == nil {
		s.rows = make([]int, s.n, s.n+got+got/8)
		for i := range s.rows {
			s.rows[i] = s.firstRow + i
		}
	}
	if rows == nil {
		for i := range got {
			s.rows = append(s.rows, first+i)
		}
		return
	}
	s.rows = append(s.rows, rows...)
}

// afterRows is the offset in seg just past the line of its k-th data row
// (0 for none) and the number of lines before that offset.
func afterRows(seg []byte, k int) (off, lines int) {
	for i := 0; i < len(seg) && k > 0; {
		next, skip := skipLine(seg, i)
		if !skip {
			if j := bytes.IndexByte(seg[i:], '\n'); j >= 0 {
				next = i + j + 1
			} else {
				next = len(seg)
			}
			k--
		}
		i, off = next, next
		lines++
	}
	return off, lines
}

// FitCSVStream starts the streaming decode of a fit CSV whose options are
// in q, or says (ok false) that the body is to be read whole and decoded
// by FitFromCSV: options that cannot be taken (FitFromCSV names the fault
// after the body has arrived, as always), group_by, or options the chunk
// reader leaves to the row-by-row reader.
func FitCSVStream(q url.Values, lim *Limits, declared int64) (st *CSVStream, rest url.Values, ok bool) {
	o, rest, err := TakeCSVOptions(q)
	if err != nil || !o.plain() || o.decimal() != '.' {
		return nil, nil, false
	}
	return NewCSVStream(o, lim, declared), rest, true
}

// FinishFit is FitFromCSV's ending for a streamed body: the dataset, then
// the fit options of rest.
func FinishFit(st *CSVStream, rest url.Values) (*FitRequest, error) {
	d, err := st.Finish()
	if err != nil {
		return nil, err
	}
	return fitRequestOf(d, rest)
}
