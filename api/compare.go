package api

import (
	"context"

	"eivfit/api/report"
	"eivfit/api/wire"
	"eivfit/eiv/study"

	"github.com/gin-gonic/gin"
)

// compareEndpoint is POST /v1/method-comparison: a method-comparison study.
var compareEndpoint = &endpoint[*wire.CompareRequest, *study.Comparison]{
	fromJSON: wire.DecodeCompareJSON,
	fromCSV:  wire.CompareFromCSV,
	source:   (*wire.CompareRequest).Source,
	compute: func(ctx context.Context, req *wire.CompareRequest, set study.Settings) (*study.Comparison, error) {
		return study.Compare(ctx, req.Samples, req.Options(set))
	},
	answer: func(req *wire.CompareRequest, c *study.Comparison) any { return wire.NewCompareResponse(req, c) },
	points: func(c *study.Comparison) int { return c.N },
}

type compareAnswer = answer[*wire.CompareRequest, *study.Comparison]

func (s *Server) comparePage(ctx context.Context, a *compareAnswer, sha string) (*report.Page, error) {
	return report.CompareReport(ctx, a.resp.(*wire.CompareResponse), a.res, sha, s.cfg.Version)
}

// handleCompare serves POST /v1/method-comparison.
func (s *Server) handleCompare(c *gin.Context) { serve(s, c, compareEndpoint, s.comparePage) }
