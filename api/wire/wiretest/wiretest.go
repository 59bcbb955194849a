// Package wiretest holds what the tests and the measurement tools share:
// the request body of `go test -bench SmallFit`, `eivfit bench` and
// `eivfit load` (the same request, so their figures compare), and the
// check of golden files.
package wiretest

import (
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

// CPUTime is the CPU time (user and system) the process has used so far.
// A benchmark reports (CPUTime() − start)/b.N as cpu-ns/op: on a machine
// shared with other work, what an operation costs rather than how long it
// waited for a core, which ns/op mixes in.
func CPUTime() time.Duration {
	var ru syscall.Rusage
	_ = syscall.Getrusage(syscall.RUSAGE_SELF, &ru)
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// ReportCPU reports the CPU time per operation since start (a CPUTime
// taken before the benchmark's loop) as cpu-ns/op.
func ReportCPU(b *testing.B, start time.Duration) {
	b.ReportMetric(float64(CPUTime()-start)/float64(b.N), "cpu-ns/op")
}

// SmallFit is the body of a small fit request (POST /v1/fit, JSON): 40
// points on y = 0.1 + 1.03·t with x in [5, 25], errors of SD 0.2 in x and
// 0.25 in y stated per point, fitted by OLS, Deming and York. The points
// come from a fixed seed, so the body is the same on every call.
func SmallFit() []byte {
	r := rand.New(rand.NewPCG(5, 5))
	pts := make([]string, 0, 40)
	for range 40 {
		t := 5 + 20*r.Float64()
		pts = append(pts, fmt.Sprintf(`{"x":%.4f,"y":%.4f,"sx":0.2,"sy":0.25}`, t+0.2*r.NormFloat64(), 0.1+1.03*t+0.25*r.NormFloat64()))
	}
	return []byte(`{"points":[` + strings.Join(pts, ",") + `],"methods":["ols","deming","york"]}`)
}

// TB is the part of testing.TB that CheckGolden uses; the package does not
// import testing, so that the eivfit binary (bench, load) does not link it.
type TB interface {
	Helper()
	Fatal(args ...any)
	Fatalf(format string, args ...any)
	Errorf(format string, args ...any)
}

// CheckGolden compares got with the golden file at path, or, when update
// is set (each test package's -update flag), rewrites the file. On a
// difference it names the first line that differs.
func CheckGolden(t TB, path string, got []byte, update bool) {
	t.Helper()
	if update {
		if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, got, 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run the test with -update to create it)", err)
	}
	if string(got) == string(want) {
		return
	}
	wl, gl := strings.Split(string(want), "\n"), strings.Split(string(got), "\n")
	for i := range max(len(wl), len(gl)) {
		w, g := "", ""
		if i < len(wl) {
			w = wl[i]
		}
		if i < len(gl) {
			g = gl[i]
		}
		if w != g {
			t.Errorf("output differs from %s (run with -update and read the diff); first at line %d:\nwant %.200s\ngot  %.200s", path, i+1, w, g)
			return
		}
	}
}
