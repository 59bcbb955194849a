package api

import (
	"context"
	"fmt"
	"net/http"
	"runtime"

	"eivfit/api/wire"
	"eivfit/eiv/study"

	"github.com/gin-gonic/gin"
)

// A CSV with group_by (one column naming the analyte, say) is split into
// one study per group, answered as a batch: each group its own result or
// problem, in order of first appearance.

// groupStudy runs one group's request: the endpoint's computation and
// answer, as in the one analysis flow.
func groupStudy[Req, Res any](e *endpoint[Req, Res], put func(*wire.BatchResult, any)) func(context.Context, wire.Grouped[Req], study.Settings) wire.BatchResult {
	return func(ctx context.Context, g wire.Grouped[Req], set study.Settings) wire.BatchResult {
		res := wire.BatchResult{Name: g.Name}
		fail := func(err error) wire.BatchResult {
			p, ok := err.(*wire.Problem)
			if !ok {
				p = wire.NewProblem(wire.KindUnfittable, err.Error())
			}
			res.Problem, res.Status = p, p.Status
			return res
		}
		if g.Err != nil {
			return fail(g.Err)
		}
		src := e.source(g.Req)
		r, err := e.compute(ctx, g.Req, set)
		if err != nil {
			if ctx.Err() != nil {
				return fail(batchDeadline())
			}
			return fail(src.Problem(err))
		}
		a := e.answer(g.Req, r)
		if _, err := wire.Marshal(a); err != nil {
			return fail(src.Problem(err))
		}
		res.Status = http.StatusOK
		put(&res, a)
		return res
	}
}

// serveGroups answers a CSV split by group_by: decoded at once (a fault in
// the file or the shared options refuses the request), then the groups
// fitted in the compute slots a batch takes.
func serveGroups[Req, Res any](s *Server, c *gin.Context, e *endpoint[Req, Res], decode func(*wire.Body, map[string][]string) ([]wire.Grouped[Req], error), put func(*wire.BatchResult, any)) {
	kind, body, release := s.open(c, true)
	if kind == "" {
		return
	}
	defer release()
	if kind != "csv" {
		s.problem(c, wire.Invalid("query parameter group_by", "group_by splits a CSV file: send the body as text/csv (a JSON request is one study; /v1/batch takes many)"))
		return
	}
	q, err := wire.ParseQuery(c.Request.URL.RawQuery)
	if err != nil {
		s.problem(c, s.problemFor(c, err))
		return
	}
	for _, k := range []string{"save", "label", "tags", "tag"} {
		if _, ok := q[k]; ok {
			s.problem(c, wire.Invalid(wire.QueryName(k), "a file split by group_by is not saved as studies (the store keeps one study per request): send each group's rows on their own with save=true"))
			return
		}
	}
	groups, err := decode(body, q)
	if err != nil {
		s.problem(c, s.problemFor(c, err))
		return
	}
	held, free, p := s.batchSlots(c.Request.Context(), min(runtime.GOMAXPROCS(0), len(groups)))
	if p != nil {
		s.problem(c, p)
		return
	}
	ctx, cancel := context.WithTimeout(c.Request.Context(), s.cfg.RequestTimeout)
	run := groupStudy(e, put)
	resp := runEach(ctx, len(groups), s.settings(held), func(ctx context.Context, i int, set study.Settings) wire.BatchResult {
		return run(ctx, groups[i], set)
	}, func(i int) wire.BatchResult {
		p := batchDeadline()
		return wire.BatchResult{Name: groups[i].Name, Status: p.Status, Problem: wire.Prefixed(p, fmt.Sprintf("/results/%d", i))}
	})
	cancel()
	free()
	s.countPoints(resp)
	s.writeJSON(c, http.StatusOK, resp)
}

// countPoints adds the points of every answer of a batch to the metrics.
func (s *Server) countPoints(resp *wire.BatchResponse) {
	for _, r := range resp.Results {
		switch {
		case r.Fit != nil:
			s.metrics.points.Add(float64(r.Fit.N))
		case r.Comparison != nil:
			s.metrics.points.Add(float64(r.Comparison.N))
		}
	}
}

func putFit(r *wire.BatchResult, a any)     { r.Fit = a.(*wire.FitResponse) }
func putCompare(r *wire.BatchResult, a any) { r.Comparison = a.(*wire.CompareResponse) }

func fitGroupsFromBody(b *wire.Body, q map[string][]string) ([]wire.Grouped[*wire.FitRequest], error) {
	return wire.FitGroupsFromCSV(b, q)
}

func compareGroupsFromBody(b *wire.Body, q map[string][]string) ([]wire.Grouped[*wire.CompareRequest], error) {
	return wire.CompareGroupsFromCSV(b, q)
}
