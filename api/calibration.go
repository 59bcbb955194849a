package api

import (
	"context"

	"eivfit/api/report"
	"eivfit/api/wire"
	"eivfit/eiv/study"

	"github.com/gin-gonic/gin"
)

// calibrationEndpoint is POST /v1/calibration: the calibration line from
// reference standards, its validation, and x₀ ± U(x₀) for every unknown.
var calibrationEndpoint = &endpoint[*wire.CalibrationRequest, *study.CalibrationResult]{
	fromJSON: wire.DecodeCalibrationJSON,
	fromCSV:  wire.CalibrationFromCSV,
	source:   (*wire.CalibrationRequest).Source,
	compute: func(ctx context.Context, req *wire.CalibrationRequest, set study.Settings) (*study.CalibrationResult, error) {
		return study.Calibrate(ctx, req.Data, req.Options(set))
	},
	answer: func(req *wire.CalibrationRequest, r *study.CalibrationResult) any {
		return wire.NewCalibrationResponse(req, r)
	},
	points: func(r *study.CalibrationResult) int { return r.Line.M + len(r.Unknowns) },
	record: &recordSpec[*wire.CalibrationRequest, *study.CalibrationResult]{
		kind:    study.KindCalibration,
		page:    (*Server).calibrationPage,
		options: (*wire.CalibrationRequest).CanonicalOptions,
		patch:   (*wire.CalibrationRequest).PatchOptions,
		exclude: excludeStandards,
		seed: func(r *study.CalibrationResult) (uint64, bool) {
			if r.Seed == nil {
				return 0, false
			}
			return *r.Seed, true
		},
		pin: func(req *wire.CalibrationRequest, seed uint64) {
			if req.MonteCarlo != nil && req.MonteCarlo.Seed == nil {
				req.MonteCarlo.Seed = &seed
			}
		},
	},
}

type calibrationAnswer = answer[*wire.CalibrationRequest, *study.CalibrationResult]

func (s *Server) calibrationPage(ctx context.Context, a *calibrationAnswer, sha string) (*report.Page, error) {
	return report.CalibrationReport(ctx, a.resp.(*wire.CalibrationResponse), a.res, sha, s.cfg.Version)
}

// handleCalibration serves POST /v1/calibration: JSON, or CSV with the
// options in the query; answered with JSON, or the calibration record for
// Accept: text/html.
func (s *Server) handleCalibration(c *gin.Context) {
	serve(s, c, calibrationEndpoint, s.calibrationPage)
}
