package api

import (
	"github.com/gin-gonic/gin"
)

// get registers handlers for GET and HEAD on path: HEAD answers exactly as
// GET (status and headers) without the body (RFC 9110 §9.3.2).
func get(r gin.IRoutes, path string, handlers ...gin.HandlerFunc) {
	r.GET(path, handlers...)
	r.HEAD(path, append([]gin.HandlerFunc{headOnly}, handlers...)...)
}

// headOnly makes the rest of the chain write headers but no body.
func headOnly(c *gin.Context) {
	c.Writer = headWriter{c.Writer}
	c.Next()
}

// headWriter sends the status and headers and drops the body.
type headWriter struct{ gin.ResponseWriter }

func (w headWriter) Write(b []byte) (int, error) {
	w.WriteHeaderNow()
	return len(b), nil
}

func (w headWriter) WriteString(s string) (int, error) {
	w.WriteHeaderNow()
	return len(s), nil
}
