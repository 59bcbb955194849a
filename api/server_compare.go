package api

import (
	"context"
	"io"
	"net/http"
	"net/url"

	"github.com/gin-gonic/gin"
)

// CompareCSV decodes a CSV study, takes the options from the query, and
// runs it: the path of `eivfit compare` and of a text/csv POST.
func CompareCSV(ctx context.Context, body io.Reader, q url.Values, set Settings) (*CompareResponse, error) {
	req, err := DecodeCompareCSV(body)
	if err != nil {
		return nil, err
	}
	if err := CompareRequestFromQuery(q, req); err != nil {
		return nil, err
	}
	return Compare(ctx, req, set)
}

// handleCompare serves POST /v1/method-comparison.
func (s *Server) handleCompare(c *gin.Context) {
	kind := s.mediaType(c, true)
	if kind == "" {
		return
	}
	body, release, p := s.body(c)
	if p != nil {
		s.problem(c, p)
		return
	}
	defer release()
	body, sum := hashingBody(body)
	var req *CompareRequest
	var err error
	if kind == "csv" {
		if req, err = DecodeCompareCSV(body); err == nil {
			err = CompareRequestFromQuery(c.Request.URL.Query(), req)
		}
	} else {
		if len(c.Request.URL.RawQuery) > 0 {
			s.problem(c, invalid("query", "a JSON request carries its options in the body, not the query string"))
			return
		}
		req, err = DecodeCompareJSON(body)
	}
	if err == nil {
		err = req.Validate(s.cfg.Limits)
	}
	if err != nil {
		s.problem(c, s.toProblem(c, err))
		return
	}
	resp, err := s.computeCompare(c, req)
	if err != nil {
		s.problem(c, s.toProblem(c, err))
		return
	}
	if wantsHTML(c) {
		page, err := CompareReport(resp, req, hexSum(sum), s.cfg.Version)
		if err != nil {
			s.problem(c, s.toProblem(c, err))
			return
		}
		s.writeHTML(c, http.StatusOK, page.Write)
		return
	}
	s.writeJSON(c, http.StatusOK, resp)
}
