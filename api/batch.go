package api

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"net/http"
	"runtime"
	"sync"

	"github.com/gin-gonic/gin"
)

// BatchRequest is the body of POST /v1/batch: many named datasets (for
// example every analyte of one study), each a complete fit request.
type BatchRequest struct {
	Datasets []json.RawMessage `json:"datasets"`
}

// BatchEntry is one dataset of a batch: a fit request with a name.
type BatchEntry struct {
	Name string `json:"name,omitempty"`
	FitRequest
}

// BatchResponse holds one result per dataset, in request order. A dataset
// that cannot be fitted has its own problem and does not fail the others.
type BatchResponse struct {
	Results []BatchResult `json:"results"`
	OK      int           `json:"ok"`
	Failed  int           `json:"failed"`
}

// BatchResult is the outcome of one dataset: Fit when Status is 200,
// otherwise Problem.
type BatchResult struct {
	Name    string       `json:"name"`
	Status  int          `json:"status"`
	Fit     *FitResponse `json:"fit,omitempty"`
	Problem *Problem     `json:"problem,omitempty"`
}

// prefixed returns a copy of p with every pointer moved under prefix.
func prefixed(p *Problem, prefix string) *Problem {
	q := *p
	q.Errors = make([]FieldError, len(p.Errors))
	for i, e := range p.Errors {
		q.Errors[i] = FieldError{Pointer: prefix + e.Pointer, Detail: e.Detail}
	}
	return &q
}

// RunBatch decodes and fits every dataset in parallel (up to GOMAXPROCS at
// once, each bootstrap on one core), stopping early only when ctx ends.
func RunBatch(ctx context.Context, req *BatchRequest, set Settings, maxBatch int) (*BatchResponse, error) {
	if len(req.Datasets) == 0 {
		return nil, invalid("/datasets", "datasets is required: an array of fit requests, each with a name")
	}
	if maxBatch > 0 && len(req.Datasets) > maxBatch {
		return nil, invalid("/datasets", fmt.Sprintf("at most %d datasets per batch", maxBatch))
	}
	out := &BatchResponse{Results: make([]BatchResult, len(req.Datasets))}
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

func runEntry(ctx context.Context, i int, raw json.RawMessage, set Settings) BatchResult {
	prefix := fmt.Sprintf("/datasets/%d", i)
	res := BatchResult{Name: fmt.Sprintf("dataset %d", i+1)}
	fail := func(err error) BatchResult {
		p, ok := err.(*Problem)
		if !ok {
			p = newProblem(kindUnfittable, err.Error())
		}
		res.Problem = prefixed(p, prefix)
		res.Status = p.Status
		return res
	}
	var e BatchEntry
	if err := decodeStrict(bytes.NewReader(raw), &e); err != nil {
		return fail(err)
	}
	if e.Name != "" {
		res.Name = e.Name
	}
	fit, err := Fit(ctx, &e.FitRequest, set)
	if err != nil {
		if ctx.Err() != nil {
			return fail(newProblem(kindDeadline, "the batch ran past its deadline before this dataset was fitted"))
		}
		return fail(err)
	}
	res.Status, res.Fit = http.StatusOK, fit
	return res
}

// handleBatch serves POST /v1/batch. The batch holds one compute slot.
func (s *Server) handleBatch(c *gin.Context) {
	if s.mediaType(c, false) == "" {
		return
	}
	body, release, p := s.body(c)
	if p != nil {
		s.problem(c, p)
		return
	}
	defer release()
	var req BatchRequest
	if err := decodeStrict(body, &req); err != nil {
		s.problem(c, s.toProblem(c, err))
		return
	}
	resp, err := inSlot(s, c, func(ctx context.Context) (*BatchResponse, error) {
		return RunBatch(ctx, &req, s.settings(1), s.cfg.MaxBatch)
	})
	if err != nil {
		s.problem(c, s.toProblem(c, err))
		return
	}
	for _, r := range resp.Results {
		if r.Fit != nil {
			s.metrics.points.Add(float64(r.Fit.N))
		}
	}
	s.writeJSON(c, http.StatusOK, resp)
}
