package wire_test

import (
	"context"
	"errors"
	"fmt"
	"net/url"
	"os"
	"strings"

	"eivfit/api/wire"
	"eivfit/eiv/study"
)

// A CSV body with its options in the query, as POST /v1/fit takes it (and
// `eivfit fit` its file and flags): decode, fit in the study layer,
// convert to the wire form and write JSON. The data are the ISO/TS
// 28037:2010 §7.4 worked example (published a = 0.5788, b = 2.1597, see
// ExampleYork in package eiv).
func ExampleFitFromCSV() {
	body := "x,sx,y,sy\n1.2,0.2,3.4,0.2\n1.9,0.2,4.4,0.2\n2.9,0.2,7.2,0.2\n4.0,0.2,8.5,0.4\n4.7,0.2,10.8,0.4\n5.9,0.2,13.5,0.4\n"
	req, err := wire.FitFromCSV(strings.NewReader(body), url.Values{"methods": {"york"}})
	if err != nil {
		fmt.Println(err)
		return
	}
	res, err := study.Fit(context.Background(), req.Points.Data, req.Options(study.Settings{}))
	if err != nil {
		fmt.Println(req.Source().Problem(err))
		return
	}
	resp := wire.NewFitResponse(res)
	y := resp.Fits.York
	fmt.Printf("york: slope %.4f (se %.4f), intercept %.4f (se %.4f), MSWD %.4f\n",
		y.Slope.Estimate, *y.Slope.SE, y.Intercept.Estimate, *y.Intercept.SE, *y.MSWD)
	// WriteJSON writes the answer compact, and refuses a number that is
	// not finite as unfittable data.
	_ = wire.WriteJSON(os.Stdout, map[string]any{"n": resp.N, "methods": len(res.Fits), "se_basis": y.SEBasis})
	// Output:
	// york: slope 2.1597 (se 0.1355), intercept 0.5788 (se 0.4764), MSWD 0.6857
	// {"methods":1,"n":6,"se_basis":"York et al. (2004), stated uncertainties, unscaled"}
}

// An error of the study is located in the client's terms: a CSV cell by
// its row and column, a JSON value by its pointer, an option by its query
// parameter or its command-line flag.
func ExampleSource_Problem() {
	body := "x,y,sx,sy\n1,2,0.1,0.1\n2,3,-0.1,0.1\n3,5,0.1,0.1\n"
	req, err := wire.FitFromCSV(strings.NewReader(body), url.Values{"confidence": {"1.5"}})
	if err != nil {
		fmt.Println(err)
		return
	}
	_, err = study.Fit(context.Background(), req.Points.Data, req.Options(study.Settings{}))
	for _, src := range []*wire.Source{req.Source(), req.Source().AsFlags()} {
		var p *wire.Problem
		if errors.As(src.Problem(err), &p) {
			fmt.Println(p.Status, p.Title)
			for _, e := range p.Errors {
				fmt.Printf("  %s: %s\n", e.Pointer, e.Detail)
			}
		}
	}
	// Output:
	// 400 The request is not valid
	//   row 3, column sx: sx must be a standard uncertainty ≥ 0, not -0.1
	//   query parameter confidence: confidence must lie between 1e-09 and 0.999999999 (e.g. 0.95), not 1.5: closer to 0 or 1 its quantiles are not resolved in double precision
	// 400 The request is not valid
	//   row 3, column sx: sx must be a standard uncertainty ≥ 0, not -0.1
	//   --confidence: confidence must lie between 1e-09 and 0.999999999 (e.g. 0.95), not 1.5: closer to 0 or 1 its quantiles are not resolved in double precision
}
