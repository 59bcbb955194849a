package api

import (
	"context"
	"fmt"
	"maps"
	"net/http"
	"runtime"
	"slices"
	"sync"

	"eivfit/api/wire"
	"eivfit/eiv/study"

	"github.com/gin-gonic/gin"
)

// RunBatch decodes and runs every dataset (a fit, or a method comparison
// with kind "method-comparison"), set.Workers of them at once (zero means
// GOMAXPROCS), each study and its bootstrap on one core. When ctx ends,
// the datasets already done keep their results and every other one gets a
// deadline-exceeded problem: a batch at its deadline loses nothing it
// finished.
func RunBatch(ctx context.Context, req *wire.BatchRequest, set study.Settings, maxBatch int) (*wire.BatchResponse, error) {
	if len(req.Datasets) == 0 {
		return nil, wire.Invalid("/datasets", "datasets is required: an array of fit requests or method comparisons, each with a name")
	}
	if maxBatch > 0 && len(req.Datasets) > maxBatch {
		return nil, wire.Invalid("/datasets", fmt.Sprintf("at most %d datasets per batch", maxBatch))
	}
	fit, cmp := groupStudy(fitEndpoint, putFit), groupStudy(compareEndpoint, putCompare)
	lim := wire.Limits{Limits: set.Limits}
	out := runEach(ctx, len(req.Datasets), set, func(ctx context.Context, i int, set study.Settings) wire.BatchResult {
		var res wire.BatchResult
		e, err := req.Entry(i, lim)
		switch {
		case e.Kind == wire.DatasetComparison:
			res = cmp(ctx, wire.Grouped[*wire.CompareRequest]{Req: e.Comparison, Err: err}, set)
		default:
			res = fit(ctx, wire.Grouped[*wire.FitRequest]{Req: &e.FitRequest, Err: err}, set)
		}
		res.Name = req.Name(i)
		if e.Name != "" {
			res.Name = e.Name
		}
		if res.Problem != nil {
			res.Problem = wire.Prefixed(res.Problem, fmt.Sprintf("/datasets/%d", i))
		}
		return res
	}, func(i int) wire.BatchResult {
		p := batchDeadline()
		return wire.BatchResult{Name: req.Name(i), Status: p.Status, Problem: wire.Prefixed(p, fmt.Sprintf("/datasets/%d", i))}
	})
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

// batchDeadline is the problem of a dataset left unfitted at the deadline;
// its one error points at the dataset (once prefixed).
func batchDeadline() *wire.Problem {
	const detail = "the batch ran past its deadline before this dataset was fitted; send it again, or in a smaller batch"
	return wire.NewProblem(wire.KindDeadline, detail, wire.FieldError{Detail: detail})
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
	if p := batchQuery(c.Request.URL.RawQuery); p != nil {
		s.problem(c, p)
		return
	}
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
	s.countPoints(resp)
	s.writeJSON(c, http.StatusOK, resp)
}

// batchQuery refuses every query parameter on /v1/batch: its options are
// in the body (defaults and each dataset's own), and a batch is not saved
// as studies.
func batchQuery(raw string) *wire.Problem {
	q, err := wire.ParseQuery(raw)
	if err != nil {
		if p, ok := err.(*wire.Problem); ok {
			return p
		}
		return wire.Invalid("query", err.Error())
	}
	for _, k := range slices.Sorted(maps.Keys(q)) {
		if k == "save" || k == "label" || k == "tags" || k == "tag" {
			return wire.Invalid(wire.QueryName(k), "a batch is not saved as studies: send each dataset to /v1/fit or /v1/method-comparison with save=true")
		}
		return wire.Invalid(wire.QueryName(k), fmt.Sprintf("unknown query parameter %q: a batch carries its options in the body (defaults, and each dataset's own)", wire.Truncate(k)))
	}
	return nil
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
