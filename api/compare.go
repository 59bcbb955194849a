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
	record: &recordSpec[*wire.CompareRequest, *study.Comparison]{
		kind:    study.KindMethodComparison,
		page:    (*Server).comparePage,
		options: (*wire.CompareRequest).CanonicalOptions,
		patch:   (*wire.CompareRequest).PatchOptions,
		exclude: excludeSamples,
		seed:    func(c *study.Comparison) (uint64, bool) { return bootstrapSeed(c.Fits) },
		pin:     func(req *wire.CompareRequest, seed uint64) { pinBootstrap(req.Bootstrap, seed) },
	},
}

type compareAnswer = answer[*wire.CompareRequest, *study.Comparison]

func (s *Server) comparePage(ctx context.Context, a *compareAnswer, in report.Input) (*report.Page, error) {
	return report.CompareReport(ctx, a.req, a.resp.(*wire.CompareResponse), a.res, s.made(in))
}

// handleCompare serves POST /v1/method-comparison.
// With group_by, a CSV is split into one study per group, answered as a
// batch (groups.go).
func (s *Server) handleCompare(c *gin.Context) {
	if c.Query("group_by") != "" {
		serveGroups(s, c, compareEndpoint, compareGroupsFromBody, putCompare)
		return
	}
	serve(s, c, compareEndpoint, s.comparePage)
}
