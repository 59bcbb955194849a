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
	buf := encodePool.Get().(*bytes.Buffer)
	defer func() { buf.Reset(); encodePool.Put(buf) }()
	if err := encode(buf, v); err != nil {
		return err
	}
	_, err := w.Write(buf.Bytes())
	return err
}

// Marshal encodes v as WriteJSON writes it.
func Marshal(v any) ([]byte, error) {
	var buf bytes.Buffer
	if err := encode(&buf, v); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}

// ErrNotFinite is the error of an answer holding a number that is not
// finite, as a study error on the data as a whole.
var ErrNotFinite = &study.Error{Kind: study.Unfittable, Field: study.FieldData, Index: -1,
	Err: errors.New("the result is not a finite number: the data are too extreme for double precision")}

func encode(buf *bytes.Buffer, v any) error {
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

var encodePool = sync.Pool{New: func() any { return new(bytes.Buffer) }}

// WritePrettyJSON writes v indented by two spaces.
func WritePrettyJSON(w io.Writer, v any) error {
	var compact bytes.Buffer
	if err := WriteJSON(&compact, v); err != nil {
		return err
	}
	var out bytes.Buffer
	if err := json.Indent(&out, compact.Bytes(), "", "  "); err != nil {
		return err
	}
	_, err := w.Write(out.Bytes())
	return err
}
