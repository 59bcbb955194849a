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
	req, err := compareFromCSV(body, q)
	if err != nil {
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
	req, err := decodeRequest(s, c, kind, body, compareFromCSV, DecodeCompareJSON)
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
