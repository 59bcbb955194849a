package wire

import (
	"bytes"
	"encoding/json"
	"errors"
	"io"
	"sync"

	"eivfit/eiv/study"
)

// WriteJSON writes v as the service writes every JSON answer: compact,
// HTML characters unescaped, one trailing newline. The CLI uses it too, so
// both print the same bytes (`eivfit fit --pretty`, or jq, indents). A
// number that is not finite is refused here, once for every answer, as
// unfittable data (ErrNotFinite): the estimators refuse to return one, so
// it means values too extreme for double precision.
func WriteJSON(w io.Writer, v any) error {
	e, err := Encode(v)
	if err != nil {
		return err
	}
	defer e.Free()
	_, err = w.Write(e.Bytes())
	return err
}

// Marshal encodes v as WriteJSON writes it, into a slice of its own.
func Marshal(v any) ([]byte, error) {
	e, err := Encode(v)
	if err != nil {
		return nil, err
	}
	defer e.Free()
	return bytes.Clone(e.Bytes()), nil
}

// Encoded is an answer encoded as WriteJSON writes it, in a pooled
// buffer: Bytes are valid until Free, after which the buffer is reused.
type Encoded struct{ b []byte }

// Bytes are the encoded answer, trailing newline included.
func (e *Encoded) Bytes() []byte { return e.b }

// Free returns the buffer to the pool; e must not be used afterwards. A
// buffer grown past pooledCap is left to the collector, so that one large
// answer does not stay resident.
func (e *Encoded) Free() {
	if e == nil || e.b == nil {
		return
	}
	if cap(e.b) <= pooledCap {
		e.b = e.b[:0]
		encodePool.Put(e)
	}
}

const pooledCap = 64 << 10

var encodePool = sync.Pool{New: func() any { return &Encoded{b: make([]byte, 0, 8<<10)} }}

// Encode encodes v as WriteJSON writes it into a pooled buffer: a fit's
// answer (*FitResponse) without reflection (encodefit.go), anything else
// by encoding/json. The caller calls Free when done with the bytes.
func Encode(v any) (*Encoded, error) {
	e := encodePool.Get().(*Encoded)
	var err error
	if r, ok := v.(*FitResponse); ok && r != nil {
		o := jsonOut{b: e.b[:0]}
		err = o.fitResponse(r)
		if err == nil && o.notFinite {
			err = ErrNotFinite
		}
		e.b = append(o.b, '\n')
	} else {
		buf := bytes.NewBuffer(e.b[:0])
		err = encodeReflect(buf, v)
		e.b = buf.Bytes()
	}
	if err != nil {
		e.Free()
		return nil, err
	}
	return e, nil
}

// ErrNotFinite is the error of an answer holding a number that is not
// finite, as a study error on the data as a whole.
var ErrNotFinite = &study.Error{Kind: study.Unfittable, Field: study.FieldData, Index: -1,
	Err: errors.New("the result is not a finite number: the data are too extreme for double precision")}

// encodeReflect writes v by encoding/json, compact, HTML characters
// unescaped, with its trailing newline.
func encodeReflect(buf *bytes.Buffer, v any) error {
	enc := json.NewEncoder(buf)
	enc.SetEscapeHTML(false)
	if err := enc.Encode(v); err != nil {
		var ue *json.UnsupportedValueError
		if errors.As(err, &ue) {
			return ErrNotFinite
		}
		return err
	}
	return nil
}

// WritePrettyJSON writes v indented by two spaces.
func WritePrettyJSON(w io.Writer, v any) error {
	e, err := Encode(v)
	if err != nil {
		return err
	}
	defer e.Free()
	var out bytes.Buffer
	if err := json.Indent(&out, e.Bytes(), "", "  "); err != nil {
		return err
	}
	_, err = w.Write(out.Bytes())
	return err
}
