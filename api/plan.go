package api

import (
	"context"

	"eivfit/api/wire"
	"eivfit/eiv"
	"eivfit/eiv/study"

	"github.com/gin-gonic/gin"
)

// planEndpoint is POST /v1/plan: a method-comparison study planned by
// simulation. JSON only; it runs in a compute slot under the deadline like
// every analysis.
var planEndpoint = &endpoint[*wire.PlanRequest, *eiv.PlanResult]{
	fromJSON: wire.DecodePlanJSON,
	source:   (*wire.PlanRequest).Source,
	compute: func(ctx context.Context, req *wire.PlanRequest, set study.Settings) (*eiv.PlanResult, error) {
		return study.Plan(ctx, req.Options(set))
	},
	answer: func(req *wire.PlanRequest, r *eiv.PlanResult) any { return wire.NewPlanResponse(req, r) },
	points: func(*eiv.PlanResult) int { return 0 },
}

// handlePlan serves POST /v1/plan.
func (s *Server) handlePlan(c *gin.Context) { serve(s, c, planEndpoint, nil) }
