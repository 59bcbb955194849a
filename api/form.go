package api

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"io"
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
		return report.WriteForm(w, &report.Form{Version: s.cfg.Version, NeedsKey: len(s.keys.hashes) > 0, DemoFit: string(demo)})
	})
}

// handleFormReport serves POST /report: the page's form (multipart or
// urlencoded, no JavaScript needed), answered with the HTML report; a bad
// input is answered with the form again and the problem in words.
func (s *Server) handleFormReport(c *gin.Context) {
	body, release, p := s.body(c)
	if p != nil {
		s.formError(c, p.Status, p.Title+". "+p.Detail)
		return
	}
	defer release()
	c.Request.Body = io.NopCloser(body)
	if err := c.Request.ParseMultipartForm(32 << 20); err != nil && err != http.ErrNotMultipart {
		s.formError(c, http.StatusBadRequest, "The form could not be read: "+err.Error())
		return
	}
	if len(s.keys.hashes) > 0 && !s.keys.valid(c.Request.FormValue("api_key")) {
		s.formError(c, http.StatusUnauthorized, "A valid API key is required.")
		return
	}
	var data []byte
	if fh, err := c.FormFile("file"); err == nil && fh.Size > 0 {
		f, err := fh.Open()
		if err != nil {
			s.formError(c, http.StatusBadRequest, "The uploaded file could not be read.")
			return
		}
		data, err = io.ReadAll(f)
		f.Close()
		if err != nil {
			s.formError(c, http.StatusBadRequest, "The uploaded file could not be read.")
			return
		}
	} else {
		data = []byte(c.Request.FormValue("csv"))
	}
	if len(bytes.TrimSpace(data)) == 0 {
		s.formError(c, http.StatusBadRequest, "Choose a CSV file or paste CSV data.")
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
			page, err = s.comparePage(a, sha)
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
			page, err = s.fitPage(a, sha)
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
		return report.WriteForm(w, &report.Form{Version: s.cfg.Version, NeedsKey: len(s.keys.hashes) > 0, Error: msg,
			DemoFit: c.Request.FormValue("csv")})
	})
}
