package api

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"mime"
	"net/http"

	"github.com/gin-gonic/gin"
)

// formTextMax bounds a urlencoded form (pasted data), as the standard
// library's form parser does: a larger file goes as a multipart upload,
// bounded by the body limit.
const formTextMax = 10 << 20

// readForm reads the report form (multipart or urlencoded) within the body
// limit and the memory budget. When it cannot, it answers the form again
// saying what was wrong (media type, size, syntax) and returns ok false;
// otherwise the caller calls release when done with the request.
func (s *Server) readForm(c *gin.Context) (release func(), ok bool) {
	ct := c.GetHeader("Content-Type")
	mt, _, err := mime.ParseMediaType(ct)
	if err != nil || mt != "multipart/form-data" && mt != "application/x-www-form-urlencoded" {
		s.formProblemOf(c, newProblem(kindMediaType, fmt.Sprintf(
			"the form must be sent as multipart/form-data or application/x-www-form-urlencoded, not %q", truncate(ct))))
		return nil, false
	}
	body, release, p := s.body(c)
	if p != nil {
		s.formProblemOf(c, p)
		return nil, false
	}
	if mt == "multipart/form-data" {
		c.Request.Body = io.NopCloser(body)
		err = c.Request.ParseMultipartForm(32 << 20)
	} else {
		var b []byte
		b, err = io.ReadAll(io.LimitReader(body, formTextMax+1))
		if err == nil && len(b) > formTextMax {
			release()
			s.formProblemOf(c, newProblem(kindTooLarge, fmt.Sprintf(
				"pasted data (a urlencoded form) is limited to %d MiB: upload the CSV as a file instead", formTextMax>>20)))
			return nil, false
		}
		if err == nil {
			c.Request.Body = io.NopCloser(bytes.NewReader(b))
			err = c.Request.ParseForm()
		}
	}
	if err != nil {
		release()
		var mbe *http.MaxBytesError
		if errors.As(err, &mbe) {
			s.formProblemOf(c, s.toProblem(c, err))
		} else {
			s.formProblemOf(c, newProblem(kindInvalid, "the form could not be read ("+mt+"): "+err.Error()))
		}
		return nil, false
	}
	return release, true
}

// formData returns the CSV of the form: the uploaded file (field "file"),
// else the pasted text (field "csv"); msg says what is missing otherwise.
func formData(c *gin.Context) (data []byte, msg string) {
	if fh, err := c.FormFile("file"); err == nil && fh.Size > 0 {
		f, err := fh.Open()
		if err != nil {
			return nil, "The uploaded file could not be read."
		}
		defer f.Close()
		if data, err = io.ReadAll(f); err != nil {
			return nil, "The uploaded file could not be read."
		}
	} else {
		data = []byte(c.Request.FormValue("csv"))
	}
	if len(bytes.TrimSpace(data)) > 0 {
		return data, ""
	}
	hasFile := false
	if mf := c.Request.MultipartForm; mf != nil {
		_, hasFile = mf.File["file"]
	}
	_, hasText := c.Request.PostForm["csv"]
	switch {
	case hasFile:
		return nil, "The uploaded file (field \"file\") is empty; choose a CSV file or paste CSV data."
	case hasText:
		return nil, "The pasted data (field \"csv\") is empty; choose a CSV file or paste CSV data."
	}
	return nil, "The form carries no data: it needs a CSV file (field \"file\") or pasted CSV (field \"csv\")."
}

// formProblemOf answers the form again with the problem in words.
func (s *Server) formProblemOf(c *gin.Context, p *Problem) {
	s.formProblem(c, p)
}
