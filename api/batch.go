package api

import (
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

// RunBatch decodes and fits every dataset, set.Workers of them at once
// (zero means GOMAXPROCS), each fit and its bootstrap on one core. When ctx
// ends, the datasets already fitted keep their results and every other one
// gets a deadline-exceeded problem: a batch at its deadline loses nothing
// it finished.
func RunBatch(ctx context.Context, req *wire.BatchRequest, set study.Settings, maxBatch int) (*wire.BatchResponse, error) {
	if len(req.Datasets) == 0 {
		return nil, wire.Invalid("/datasets", "datasets is required: an array of fit requests, each with a name")
	}
	if maxBatch > 0 && len(req.Datasets) > maxBatch {
		return nil, wire.Invalid("/datasets", fmt.Sprintf("at most %d datasets per batch", maxBatch))
	}
	out := runEach(ctx, len(req.Datasets), set, func(ctx context.Context, i int, set study.Settings) wire.BatchResult {
		return runEntry(ctx, i, req.Datasets[i], set)
	}, func(i int) wire.BatchResult { return unfinished(i, req.Datasets[i]) })
	return out, nil
}

// runEach runs n studies, set.Workers of them at once (zero means
// GOMAXPROCS), each on one core. When ctx ends, the studies already done
// keep their results and every other one gets left(i).
func runEach(ctx context.Context, n int, set study.Settings, run func(context.Context, int, study.Settings) wire.BatchResult, left func(int) wire.BatchResult) *wire.BatchResponse {
	out := &wire.BatchResponse{Results: make([]wire.BatchResult, n)}
	workers := set.Workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	set.Workers = 1
	work := make(chan int)
	var wg sync.WaitGroup
	for range min(workers, n) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range work {
				out.Results[i] = run(ctx, i, set)
			}
		}()
	}
dispatch:
	for i := range n {
		select {
		case work <- i:
		case <-ctx.Done():
			break dispatch
		}
	}
	close(work)
	wg.Wait()
	for i := range out.Results {
		r := &out.Results[i]
		if r.Status == 0 { // never started: the batch ended first
			*r = left(i)
		}
		if r.Status == http.StatusOK {
			out.OK++
		} else {
			out.Failed++
		}
	}
	return out
}

// unfinished is the result of a dataset the batch's deadline left unfitted.
func unfinished(i int, raw json.RawMessage) wire.BatchResult {
	res := wire.BatchResult{Name: fmt.Sprintf("dataset %d", i+1)}
	var named struct {
		Name string `json:"name"`
	}
	if json.Unmarshal(raw, &named) == nil && named.Name != "" {
		res.Name = named.Name
	}
	p := batchDeadline()
	res.Problem, res.Status = wire.Prefixed(p, fmt.Sprintf("/datasets/%d", i)), p.Status
	return res
}

// batchDeadline is the problem of a dataset left unfitted at the deadline;
// its one error points at the dataset (once prefixed).
func batchDeadline() *wire.Problem {
	const detail = "the batch ran past its deadline before this dataset was fitted; send it again, or in a smaller batch"
	return wire.NewProblem(wire.KindDeadline, detail, wire.FieldError{Detail: detail})
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
	e, err := wire.DecodeBatchEntry(raw, wire.Limits{Limits: set.Limits})
	if err != nil {
		return fail(err)
	}
	if e.Name != "" {
		res.Name = e.Name
	}
	src := e.FitRequest.Source()
	r, err := study.Fit(ctx, e.Points.Data, e.Options(set))
	if err != nil {
		if ctx.Err() != nil {
			return fail(batchDeadline())
		}
		return fail(src.Problem(err))
	}
	fit := wire.NewFitResponse(r).WithUnits(e.XUnit, e.YUnit)
	if _, err := wire.Marshal(fit); err != nil { // the finite check of every answer
		return fail(src.Problem(err))
	}
	res.Status, res.Fit = http.StatusOK, fit
	return res
}

// handleBatch serves POST /v1/batch. The batch takes one compute slot,
// waiting as any request does, then every further free slot it can use
// (one per dataset, at most GOMAXPROCS), and fits one dataset per slot
// held, so that it never uses more cores than it holds.
func (s *Server) handleBatch(c *gin.Context) {
	kind, body, release := s.open(c, false)
	if kind == "" {
		return
	}
	defer release()
	req, err := wire.DecodeBatch(body)
	if err != nil {
		s.problem(c, s.problemFor(c, err))
		return
	}
	held, free, p := s.batchSlots(c.Request.Context(), min(runtime.GOMAXPROCS(0), len(req.Datasets)))
	if p != nil {
		s.problem(c, p)
		return
	}
	ctx, cancel := context.WithTimeout(c.Request.Context(), s.cfg.RequestTimeout)
	resp, err := RunBatch(ctx, req, s.settings(held), s.cfg.MaxBatch)
	cancel()
	free()
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

// batchSlots takes one compute slot (waiting up to SlotWait), then up to
// want−1 more that are free now, without waiting. held is the number
// taken; release gives them all back.
func (s *Server) batchSlots(ctx context.Context, want int) (held int, release func(), p *wire.Problem) {
	first, p := s.acquire(ctx)
	if p != nil {
		return 0, nil, p
	}
	held = 1
extra:
	for held < want {
		select {
		case s.slots <- struct{}{}:
			held++
			s.metrics.slotsInUse.Inc()
		default:
			break extra
		}
	}
	return held, func() {
		for range held - 1 {
			<-s.slots
			s.metrics.slotsInUse.Dec()
		}
		first()
	}, nil
}
