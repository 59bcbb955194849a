// Package pooltest runs a package's tests with the buffer pool poisoned.
package pooltest

import (
	"flag"
	"os"
	"testing"

	"eivfit/api/internal/bufpool"
)

// Main is a TestMain that runs the tests with bufpool.Poison on: a body
// read after its buffer went back to the pool reads a pattern and decodes
// differently, and a write after it or a second release panics.
// Benchmarks run without it, as the server does.
func Main(m *testing.M) {
	flag.Parse()
	if flag.Lookup("test.bench").Value.String() == "" {
		bufpool.Poison(true)
	}
	os.Exit(m.Run())
}
