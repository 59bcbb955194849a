package eiv

// The Monte Carlo helpers exported to the tests of package eiv_test.
var (
	ShortestInterval  = shortestInterval
	RadixSort         = radixSort
	StudentT          = studentT
	TTwoSidedQuantile = tTwoSidedQuantile
	CoverageK         = coverageK
)
