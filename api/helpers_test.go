package api

import (
	"context"
	"errors"
	"testing"

	"eivfit/api/wire"
	"eivfit/eiv/study"
)

// defaultSettings are the CLI's.
var defaultSettings = study.Settings{Limits: study.DefaultLimits}

// runFit is the handler's path without HTTP: fit, convert, encode; errors
// located as the handler locates them.
func runFit(ctx context.Context, req *wire.FitRequest, set study.Settings) (*wire.FitResponse, error) {
	r, err := study.Fit(ctx, req.Points.Data, req.Options(set))
	if err != nil {
		return nil, req.Source().Problem(err)
	}
	resp := wire.NewFitResponse(r)
	if _, err := wire.Marshal(resp); err != nil {
		return nil, req.Source().Problem(err)
	}
	return resp, nil
}

// runCompare is runFit for a method comparison.
func runCompare(ctx context.Context, req *wire.CompareRequest, set study.Settings) (*wire.CompareResponse, error) {
	c, err := study.Compare(ctx, req.Samples, req.Options(set))
	if err != nil {
		return nil, req.Source().Problem(err)
	}
	resp := wire.NewCompareResponse(req, c)
	if _, err := wire.Marshal(resp); err != nil {
		return nil, req.Source().Problem(err)
	}
	return resp, nil
}

func problemOf(t *testing.T, err error) *wire.Problem {
	t.Helper()
	var p *wire.Problem
	if !errors.As(err, &p) {
		t.Fatalf("want a *wire.Problem, got %T %v", err, err)
	}
	return p
}
