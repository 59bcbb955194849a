package wire

import (
	"testing"

	"eivfit/api/internal/bufpool/pooltest"
)

// The package's tests run with the buffer pool poisoned (pooltest.Main).
func TestMain(m *testing.M) { pooltest.Main(m) }
