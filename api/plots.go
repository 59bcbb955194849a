package api

import (
	"context"
	"fmt"
	"net/http"
	"slices"
	"strings"

	"eivfit/api/report"
	"eivfit/api/wire"

	"github.com/gin-gonic/gin"
)

// handlePlot serves POST /v1/plots/{kind}: a fit request (JSON, or CSV with
// the options in the query) drawn as one SVG plot; "method" in the query
// picks the fit to draw.
func (s *Server) handlePlot(c *gin.Context) {
	kind := c.Param("kind")
	if !slices.Contains(report.PlotKinds, kind) {
		s.problem(c, wire.NewProblem(wire.KindNotFound, fmt.Sprintf("no plot %q; plots: %s", wire.Truncate(kind), strings.Join(report.PlotKinds, ", "))))
		return
	}
	mt, body, release := s.open(c, true)
	if mt == "" {
		return
	}
	defer release()
	q, err := wire.ParseQuery(c.Request.URL.RawQuery)
	if err == nil && len(q["method"]) > 1 {
		err = wire.Invalid("query parameter method", wire.Repeated(len(q["method"])))
	}
	if err != nil {
		s.problem(c, s.problemFor(c, err))
		return
	}
	method := q.Get("method")
	q.Del("method")
	if mt == "json" && len(q) > 0 {
		s.problem(c, wire.Invalid("query", "with a JSON body only the query parameter method is taken"))
		return
	}
	a, err := analyse(s, c, fitEndpoint, mt, body, q)
	if err != nil {
		s.problem(c, s.problemFor(c, err))
		return
	}
	type drawn struct {
		b  []byte
		ok bool
	}
	out, err := render(s, c, func(ctx context.Context) (drawn, error) {
		b, ok, err := report.FitPlot(ctx, kind, a.resp.(*wire.FitResponse), a.res, &a.req.Points.Data, method)
		return drawn{b, ok}, err
	})
	b, ok := out.b, out.ok
	switch {
	case err != nil:
		s.problem(c, s.problemFor(c, err))
	case !ok:
		s.problem(c, wire.Invalid("/bootstrap/resamples", "the bootstrap plot needs a bootstrap: ask for resamples"))
	default:
		c.Header("Content-Security-Policy", report.ContentSecurityPolicy)
		c.Data(http.StatusOK, "image/svg+xml", b)
	}
}
