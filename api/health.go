package api

import (
	"context"
	"embed"
	"net/http"
	"time"

	"eivfit/api/wire"

	"eivfit/openapi"

	"github.com/gin-gonic/gin"
)

// Demo holds the synthetic demo datasets (copies of testdata/demo-*.csv,
// kept identical by a test), served at /demo/FILE so that a fresh server
// can be tried at once.
//
//go:embed demo/*.csv
var Demo embed.FS

// handleDemo serves GET /demo/FILE.
func (s *Server) handleDemo(c *gin.Context) {
	b, err := Demo.ReadFile("demo/" + c.Param("file"))
	if err != nil {
		s.problem(c, wire.NewProblem(wire.KindNotFound, "demo files: demo-glucose.csv, demo-gas-sensor.csv, demo-glucose-duplicates.csv"))
		return
	}
	c.Data(http.StatusOK, "text/csv; charset=utf-8", b)
}

// handleOpenAPI serves GET /openapi.yaml.
func handleOpenAPI(c *gin.Context) {
	c.Data(http.StatusOK, "application/yaml", openapi.Spec)
}

// handleHealthz serves GET /healthz: the process is up.
func (s *Server) handleHealthz(c *gin.Context) {
	s.writeJSON(c, http.StatusOK, map[string]string{"status": "ok", "version": s.cfg.Version})
}

// handleReadyz serves GET /readyz: 503 while draining, and while the
// intake budget could not take one more maximum-size body (the pod is then
// saturated with uploads and a load balancer should prefer another), and
// while the study store (when there is one) is not open or does not answer
// a ping within 2 s; it reports the compute slots and the body budget in
// use.
func (s *Server) handleReadyz(c *gin.Context) {
	status, code := "ready", http.StatusOK
	free := s.intake.available()
	switch {
	case s.draining.Load():
		status, code = "draining", http.StatusServiceUnavailable
	case free < min(s.cfg.MaxBodyBytes, s.cfg.MaxInFlightBytes):
		status, code = "body budget full", http.StatusServiceUnavailable
	}
	if code == http.StatusOK && s.store != nil {
		st, err := s.store.get()
		if err == nil {
			ctx, cancel := context.WithTimeout(c.Request.Context(), 2*time.Second)
			err = st.Ping(ctx)
			cancel()
		}
		if err != nil {
			c.Header("Retry-After", "5")
			s.writeJSON(c, http.StatusServiceUnavailable, map[string]string{"status": "database unavailable"})
			return
		}
	}
	s.writeJSON(c, code, map[string]any{"status": status, "slots": cap(s.slots), "slots_in_use": len(s.slots),
		"body_budget_bytes": s.cfg.MaxInFlightBytes, "body_bytes_in_use": s.cfg.MaxInFlightBytes - free})
}
