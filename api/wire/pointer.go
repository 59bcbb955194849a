package wire

import (
	"strconv"
	"strings"
)

// pointerAt returns the RFC 6901 pointer of the value being read at byte
// offset off of a JSON document, for syntax errors such as a NaN literal
// that encoding/json reports only by offset. It scans the bytes before off
// with a small state machine and is best-effort: on anything it does not
// follow it returns "".
func pointerAt(b []byte, off int64) string {
	type frame struct {
		array bool
		index int
		key   string
	}
	var stack []frame
	expectKey := false
	end := int(min(off, int64(len(b))))
	for i := 0; i < end; i++ {
		c := b[i]
		switch c {
		case '{':
			stack = append(stack, frame{})
			expectKey = true
		case '[':
			stack = append(stack, frame{array: true})
		case '}', ']':
			if len(stack) == 0 {
				return ""
			}
			stack = stack[:len(stack)-1]
		case ',':
			if len(stack) == 0 {
				return ""
			}
			if top := &stack[len(stack)-1]; top.array {
				top.index++
			} else {
				expectKey = true
			}
		case '"':
			j := i + 1
			for j < len(b) && b[j] != '"' {
				if b[j] == '\\' {
					j++
				}
				j++
			}
			if expectKey && len(stack) > 0 {
				s, err := strconv.Unquote(string(b[i:min(j+1, len(b))]))
				if err != nil {
					s = string(b[i+1 : min(j, len(b))])
				}
				stack[len(stack)-1].key = s
				expectKey = false
			}
			i = j
		}
	}
	var sb strings.Builder
	if len(stack) > 16 { // name the outer levels of a very deep document
		stack = stack[:16]
	}
	for _, f := range stack {
		sb.WriteByte('/')
		if f.array {
			sb.WriteString(strconv.Itoa(f.index))
		} else {
			sb.WriteString(escapePointer(f.key))
		}
	}
	return sb.String()
}
