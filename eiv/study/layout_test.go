package study_test

import (
	"os/exec"
	"strings"
	"testing"
)

// The import rules of the layout (DEVELOPERS.md), checked with go list:
// each package and what it must never depend on.
func TestImportRules(t *testing.T) {
	if _, err := exec.LookPath("go"); err != nil {
		t.Skip("no go command")
	}
	rules := []struct {
		pkg       string
		forbidden []string
	}{
		{"eivfit/eiv", []string{"eivfit/api", "net/http", "encoding/json", "github.com/gin-gonic/gin", "github.com/prometheus"}},
		{"eivfit/eiv/study", []string{"eivfit/api", "net/http", "encoding/json", "github.com/gin-gonic/gin", "github.com/prometheus"}},
		{"eivfit/api/wire", []string{"eivfit/api/report", "github.com/gin-gonic/gin", "github.com/prometheus"}},
		{"eivfit/api/report", []string{"github.com/gin-gonic/gin", "github.com/prometheus"}},
	}
	for _, r := range rules {
		t.Run(r.pkg, func(t *testing.T) {
			out, err := exec.Command("go", "list", "-deps", r.pkg).Output()
			if err != nil {
				t.Fatal(err)
			}
			for _, dep := range strings.Fields(string(out)) {
				for _, f := range r.forbidden {
					if dep == f || strings.HasPrefix(dep, f+"/") {
						t.Errorf("%s depends on %s", r.pkg, dep)
					}
				}
				if r.pkg == "eivfit/api/wire" && dep == "eivfit/api" {
					t.Errorf("%s depends on %s", r.pkg, dep)
				}
			}
		})
	}
}
