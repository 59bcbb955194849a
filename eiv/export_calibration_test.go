package eiv

// The Monte Carlo helpers exported to the tests of package eiv_test.
var (
	ShortestInterval  = shortestInterval
	StudentT          = studentT
	TTwoSidedQuantile = tTwoSidedQuantile
	CoverageK         = coverageK
)
