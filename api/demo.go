package api

import (
	"embed"
	"net/http"

	"eivfit/openapi"

	"github.com/gin-gonic/gin"
)

// Demo holds the synthetic demo datasets (copies of testdata/demo-*.csv,
// kept identical by a test), served at /demo/FILE so that a fresh server
// can be tried at once.
//
//go:embed demo/*.csv
var Demo embed.FS

func (s *Server) handleDemo(c *gin.Context) {
	b, err := Demo.ReadFile("demo/" + c.Param("file"))
	if err != nil {
		s.problem(c, newProblem(kindNotFound, "demo files: demo-glucose.csv, demo-gas-sensor.csv, demo-glucose-duplicates.csv"))
		return
	}
	c.Data(http.StatusOK, "text/csv; charset=utf-8", b)
}

func handleOpenAPI(c *gin.Context) {
	c.Data(http.StatusOK, "application/yaml", openapi.Spec)
}
