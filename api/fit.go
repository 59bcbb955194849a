package api

import (
	"context"
	"net/url"
	"runtime"

	"eivfit/api/report"
	"eivfit/api/wire"
	"eivfit/eiv/study"

	"github.com/gin-gonic/gin"
)

// fitEndpoint is POST /v1/fit: a line fit by every method the data support.
var fitEndpoint = &endpoint[*wire.FitRequest, *study.FitResult]{
	fromJSON: wire.DecodeFitJSON,
	fromCSV:  wire.FitFromCSV,
	streamCSV: func(q url.Values, lim *wire.Limits, declared int64) (*wire.CSVStream, func() (*wire.FitRequest, error), bool) {
		st, rest, ok := wire.FitCSVStream(q, lim, declared)
		return st, func() (*wire.FitRequest, error) { return wire.FinishFit(st, rest) }, ok
	},
	source: (*wire.FitRequest).Source,
	compute: func(ctx context.Context, req *wire.FitRequest, set study.Settings) (*study.FitResult, error) {
		return study.Fit(ctx, req.Points.Data, req.Options(set))
	},
	answer: func(req *wire.FitRequest, r *study.FitResult) any {
		return req.Response(r)
	},
	points: func(r *study.FitResult) int { return r.N },
	record: &recordSpec[*wire.FitRequest, *study.FitResult]{
		kind:    study.KindFit,
		page:    (*Server).fitPage,
		options: (*wire.FitRequest).CanonicalOptions,
		patch:   (*wire.FitRequest).PatchOptions,
		exclude: func(req *wire.FitRequest, x []study.Exclusion) error { return excludePoints(&req.Points.Data, x) },
		seed:    func(r *study.FitResult) (uint64, bool) { return bootstrapSeed(r.Fits) },
		pin:     func(req *wire.FitRequest, seed uint64) { pinBootstrap(req.Bootstrap, seed) },
	},
}

type fitAnswer = answer[*wire.FitRequest, *study.FitResult]

func (s *Server) fitPage(ctx context.Context, a *fitAnswer, in report.Input) (*report.Page, error) {
	if a.req.Points.Len() >= collectBeforeDrawing {
		runtime.GC()
	}
	return report.FitReport(ctx, a.req, a.resp.(*wire.FitResponse), a.res, s.made(in))
}

// handleFit serves POST /v1/fit: JSON, or CSV with the options in the
// query; answered with JSON, or the HTML report for Accept: text/html.
// With group_by, a CSV is split into one fit per group, answered as a
// batch (groups.go).
func (s *Server) handleFit(c *gin.Context) {
	if c.Request.URL.RawQuery != "" && c.Query("group_by") != "" {
		serveGroups(s, c, fitEndpoint, fitGroupsFromBody, putFit)
		return
	}
	serve(s, c, fitEndpoint, s.fitPage)
}
