package eiv_test

import (
	"bufio"
	"math"
	"os"
	"strconv"
	"strings"
	"testing"
)

// readRef reads a reference CSV from testdata: '#' lines are the citation
// header and are skipped; the first other line names the columns.
func readRef(t testing.TB, name string) map[string][]float64 {
	t.Helper()
	f, err := os.Open("../testdata/" + name)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	var cols []string
	out := map[string][]float64{}
	for sc.Scan() {
		line := strings.TrimSpace(sc.Text())
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		fields := strings.Split(line, ",")
		if cols == nil {
			cols = fields
			continue
		}
		for i, c := range cols {
			v, err := strconv.ParseFloat(fields[i], 64)
			if err != nil {
				t.Fatalf("%s: %v", name, err)
			}
			out[c] = append(out[c], v)
		}
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return out
}

// printed checks got against a value printed in a publication: it must
// round to the printed digits, i.e. lie within half a unit of the last
// printed digit (plus a hair for the binary representation of the bound).
func printed(t *testing.T, what string, got float64, want string) {
	t.Helper()
	v, err := strconv.ParseFloat(want, 64)
	if err != nil {
		t.Fatal(err)
	}
	decimals := 0
	if i := strings.IndexByte(want, '.'); i >= 0 {
		decimals = len(want) - i - 1
	}
	half := 0.5 * math.Pow(10, -float64(decimals))
	if math.Abs(got-v) > half*(1+1e-9) {
		t.Errorf("%s = %.12g, published %s (must agree to ±%g)", what, got, want, half)
	}
}

// near checks a relative (or, near zero, absolute) agreement. Every call
// site states where want comes from and why the tolerance is what it is.
func near(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if math.IsNaN(got) || math.Abs(got-want) > tol*math.Max(1, math.Abs(want)) {
		t.Errorf("%s = %.15g, want %.15g (tolerance %g)", what, got, want, tol)
	}
}

// sigDigits checks agreement to at least d significant digits.
func sigDigits(t *testing.T, what string, got, want float64, d int) {
	t.Helper()
	tol := 0.5 * math.Pow(10, -float64(d-1))
	if math.IsNaN(got) || math.Abs(got-want) > tol*math.Abs(want) {
		t.Errorf("%s = %.17g, want %.17g (to %d significant digits)", what, got, want, d)
	}
}
