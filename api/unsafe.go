package api

import "unsafe"

// unsafeString views b as a string without copying, for strconv parsing of
// bytes that are not kept.
func unsafeString(b []byte) string { return unsafe.String(unsafe.SliceData(b), len(b)) }
