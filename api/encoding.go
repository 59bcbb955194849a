package api

import (
	"fmt"
	"net/http"
	"strings"

	"eivfit/api/wire"

	"github.com/gin-gonic/gin"
)

// identityEncoded says whether the request body carries no content coding:
// no Content-Encoding header, or only "identity".
func identityEncoded(h http.Header) (coding string, ok bool) {
	for _, v := range h.Values("Content-Encoding") {
		for _, c := range strings.Split(v, ",") {
			if c = strings.TrimSpace(c); c != "" && !strings.EqualFold(c, "identity") {
				return c, false
			}
		}
	}
	return "", true
}

// plainBody is middleware for the routes that read a body: a body with a
// content coding (gzip, deflate, br, ...) is refused with 415 before any
// of it is read (RFC 9110 §15.5.16), with "Accept-Encoding: identity" to
// say what is taken. Decoding it here would let a small compressed body
// expand past the body limit and the memory budget, which count the bytes
// received; a client sends the body uncompressed instead.
func (s *Server) plainBody(answer func(*gin.Context, *wire.Problem)) gin.HandlerFunc {
	return func(c *gin.Context) {
		coding, ok := identityEncoded(c.Request.Header)
		if ok {
			c.Next()
			return
		}
		c.Header("Accept-Encoding", "identity")
		detail := fmt.Sprintf("Content-Encoding %q is not accepted: send the body uncompressed (no Content-Encoding header)", wire.Truncate(coding))
		answer(c, wire.NewProblem(wire.KindMediaType, detail, wire.FieldError{Pointer: "header Content-Encoding", Detail: detail}))
		c.Abort()
	}
}
