package api

import (
	"context"
	"io"
	"net/url"

	"eivfit/api/report"

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
	serveAnalysis(s, c, compareFromCSV, DecodeCompareJSON, s.computeCompare,
		func(resp *CompareResponse, req *CompareRequest, sha string) (*report.Page, error) {
			return s.compareReport(c, resp, req, sha)
		})
}
