package wire

import "io"

// Body is a request body held in memory, with the limits its lists are
// counted against while it is decoded. The decoders take its bytes without
// copying them (readBody).
type Body struct {
	b   []byte
	off int
	lim *Limits
}

// NewBody wraps b, read under lim (nil: DefaultLimits).
func NewBody(b []byte, lim *Limits) *Body { return &Body{b: b, lim: lim} }

func (b *Body) Read(p []byte) (int, error) {
	if b.off >= len(b.b) {
		return 0, io.EOF
	}
	k := copy(p, b.b[b.off:])
	b.off += k
	return k, nil
}

// Len is the number of unread bytes.
func (b *Body) Len() int { return len(b.b) - b.off }

// Bytes are the whole body as it arrived, read or not (for its hash).
func (b *Body) Bytes() []byte { return b.b }

// take returns the unread bytes and marks them read.
func (b *Body) take() []byte {
	r := b.b[b.off:]
	b.off = len(b.b)
	return r
}

// Close does nothing: a Body held in memory can be handed out where an
// io.ReadCloser is expected (the command line's input file).
func (b *Body) Close() error { return nil }
