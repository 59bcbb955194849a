package eiv

// Tail functions exported to the tests of package eiv_test.
var (
	NormalSF       = normalSF
	NormalCDF      = normalCDF
	NormalTwoSided = normalTwoSided
	TTwoSided      = tTwoSided
	ChiSquaredSF   = chiSquaredSF
	FSurvival      = fSurvival
)
