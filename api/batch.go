package api

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"net/http"
	"runtime"
	"sync"

	"eivfit/api/wire"
	"eivfit/eiv/study"

	"github.com/gin-gonic/gin"
)

// RunBatch decodes and fits every dataset in parallel (up to GOMAXPROCS at
// once, each bootstrap on one core), stopping early only when ctx ends.
func RunBatch(ctx context.Context, req *wire.BatchRequest, set study.Settings, maxBatch int) (*wire.BatchResponse, error) {
	if len(req.Datasets) == 0 {
		return nil, wire.Invalid("/datasets", "datasets is required: an array of fit requests, each with a name")
	}
	if maxBatch > 0 && len(req.Datasets) > maxBatch {
		return nil, wire.Invalid("/datasets", fmt.Sprintf("at most %d datasets per batch", maxBatch))
	}
	out := &wire.BatchResponse{Results: make([]wire.BatchResult, len(req.Datasets))}
	set.Workers = 1
	work := make(chan int)
	var wg sync.WaitGroup
	for range min(runtime.GOMAXPROCS(0), len(req.Datasets)) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range work {
				out.Results[i] = runEntry(ctx, i, req.Datasets[i], set)
			}
		}()
	}
	for i := range req.Datasets {
		if ctx.Err() != nil {
			break
		}
		work <- i
	}
	close(work)
	wg.Wait()
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	for _, r := range out.Results {
		if r.Status == http.StatusOK {
			out.OK++
		} else {
			out.Failed++
		}
	}
	return out, nil
}

func runEntry(ctx context.Context, i int, raw json.RawMessage, set study.Settings) wire.BatchResult {
	prefix := fmt.Sprintf("/datasets/%d", i)
	res := wire.BatchResult{Name: fmt.Sprintf("dataset %d", i+1)}
	fail := func(err error) wire.BatchResult {
		p, ok := err.(*wire.Problem)
		if !ok {
			p = wire.NewProblem(wire.KindUnfittable, err.Error())
		}
		res.Problem = wire.Prefixed(p, prefix)
		res.Status = p.Status
		return res
	}
	var e wire.BatchEntry
	if err := wire.DecodeStrict(bytes.NewReader(raw), &e); err != nil {
		return fail(err)
	}
	if e.Name != "" {
		res.Name = e.Name
	}
	src := e.FitRequest.Source()
	r, err := study.Fit(ctx, e.Points.Data, e.Options(set))
	if err != nil {
		if ctx.Err() != nil {
			return fail(wire.NewProblem(wire.KindDeadline, "the batch ran past its deadline before this dataset was fitted"))
		}
		return fail(src.Problem(err))
	}
	fit := wire.NewFitResponse(r)
	if _, err := wire.Marshal(fit); err != nil { // the finite check of every answer
		return fail(src.Problem(err))
	}
	res.Status, res.Fit = http.StatusOK, fit
	return res
}

// handleBatch serves POST /v1/batch. The batch holds one compute slot.
func (s *Server) handleBatch(c *gin.Context) {
	kind, body, release := s.open(c, false)
	if kind == "" {
		return
	}
	defer release()
	var req wire.BatchRequest
	if err := wire.DecodeStrict(body, &req); err != nil {
		s.problem(c, s.problemFor(c, err))
		return
	}
	resp, err := inSlot(s, c, func(ctx context.Context) (*wire.BatchResponse, error) {
		return RunBatch(ctx, &req, s.settings(1), s.cfg.MaxBatch)
	})
	if err != nil {
		s.problem(c, s.problemFor(c, err))
		return
	}
	for _, r := range resp.Results {
		if r.Fit != nil {
			s.metrics.points.Add(float64(r.Fit.N))
		}
	}
	s.writeJSON(c, http.StatusOK, resp)
}
