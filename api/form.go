package api

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"mime"
	"net/http"
	"net/url"
	"strings"

	"eivfit/api/report"
	"eivfit/api/wire"

	"github.com/gin-gonic/gin"
)

// handleIndex serves GET /: the page to paste or upload data.
func (s *Server) handleIndex(c *gin.Context) {
	demo, _ := Demo.ReadFile("demo/demo-glucose.csv")
	s.writeHTML(c, http.StatusOK, func(w io.Writer) error {
		return report.WriteForm(w, &report.Form{Version: s.cfg.Version, NeedsKey: len(s.keys.keys) > 0, DemoFit: string(demo)})
	})
}

// handleFormReport serves POST /report: the page's form (multipart or
// urlencoded, no JavaScript needed), answered with the HTML report; a bad
// input is answered with the form again and the problem in words.
func (s *Server) handleFormReport(c *gin.Context) {
	release, ok := s.readForm(c)
	if !ok {
		return
	}
	defer release()
	data, msg := formData(c)
	if msg != "" {
		s.formError(c, http.StatusBadRequest, msg)
		return
	}
	sum := sha256.Sum256(data)
	sha := hex.EncodeToString(sum[:])
	q := url.Values{}
	field := func(form, param string) {
		if v := strings.TrimSpace(c.Request.FormValue(form)); v != "" {
			q.Set(param, strings.ReplaceAll(v, " ", ""))
		}
	}
	field("confidence", "confidence")
	field("lambda", "lambda")
	field("seed", "seed")
	if v := strings.TrimSpace(c.Request.FormValue("resamples")); v != "" && v != "0" {
		q.Set("resamples", v)
	}
	var page *report.Page
	if c.Request.FormValue("analysis") == "compare" {
		field("at", "decision_levels")
		field("allowable_absolute", "allowable_absolute")
		field("allowable_percent", "allowable_percent")
		for _, k := range []string{"unit", "x_name", "y_name"} {
			if v := strings.TrimSpace(c.Request.FormValue(k)); v != "" {
				q.Set(k, v)
			}
		}
		a, err := analyse(s, c, compareEndpoint, "csv", bytes.NewReader(data), q)
		if err == nil {
			page, err = drawPage(s, c, a, sha, s.comparePage)
		}
		if err != nil {
			s.formProblem(c, err)
			return
		}
	} else {
		field("at", "at")
		field("methods", "methods")
		a, err := analyse(s, c, fitEndpoint, "csv", bytes.NewReader(data), q)
		if err == nil {
			page, err = drawPage(s, c, a, sha, s.fitPage)
		}
		if err != nil {
			s.formProblem(c, err)
			return
		}
	}
	s.writeHTML(c, http.StatusOK, page.Write)
}

func (s *Server) formProblem(c *gin.Context, err error) {
	p := s.problemFor(c, err)
	s.metrics.problems.WithLabelValues(strings.TrimPrefix(p.Type, wire.ProblemTypeBase)).Inc()
	msg := p.Title + "."
	for _, e := range p.Errors {
		msg += " " + e.Pointer + ": " + e.Detail + "."
	}
	if len(p.Errors) == 0 && p.Detail != "" {
		msg += " " + p.Detail
	}
	s.formError(c, p.Status, msg)
}

func (s *Server) formError(c *gin.Context, status int, msg string) {
	s.writeHTML(c, status, func(w io.Writer) error {
		return report.WriteForm(w, &report.Form{Version: s.cfg.Version, NeedsKey: len(s.keys.keys) > 0, Error: msg,
			DemoFit: c.Request.Form.Get("csv")}) // the form as read, if it was: never parsed here
	})
}

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
		s.formProblemOf(c, wire.NewProblem(wire.KindMediaType, fmt.Sprintf(
			"the form must be sent as multipart/form-data or application/x-www-form-urlencoded, not %q", wire.Truncate(ct))))
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
			s.formProblemOf(c, wire.NewProblem(wire.KindTooLarge, fmt.Sprintf(
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
			s.formProblemOf(c, s.problemFor(c, err))
		} else {
			s.formProblemOf(c, wire.NewProblem(wire.KindInvalid, "the form could not be read ("+mt+"): "+err.Error()))
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
func (s *Server) formProblemOf(c *gin.Context, p *wire.Problem) {
	s.formProblem(c, p)
}
