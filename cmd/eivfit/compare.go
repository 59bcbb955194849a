package main

import (
	"context"
	"flag"
	"fmt"
	"io"
	"net/url"
	"strconv"

	"eivfit/api"
)

const compareUsage = `Usage: eivfit compare [flags] FILE

Runs a method-comparison study on the CSV file FILE ("-" reads standard
input): x is the comparative method in service, y the candidate. The header
names the columns: id, order (optional), x or x1, x2, ... (replicates), y or
y1, y2, ..., and optionally sx, sy. Differences are y - x.

Flags:
`

// runCompare builds the same request as POST /v1/method-comparison with a
// CSV body and prints the same JSON.
func runCompare(ctx context.Context, args []string, stdin io.Reader, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("compare", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.Usage = func() {
		fmt.Fprint(stderr, compareUsage)
		fs.PrintDefaults()
	}
	strs := map[string]*string{}
	for _, f := range []struct{ name, param, usage string }{
		{"decision-levels", "decision_levels", "comma list of x values at which bias is judged"},
		{"allowable-absolute", "allowable_absolute", "allowable bias in units of x"},
		{"allowable-percent", "allowable_percent", "allowable bias in percent of the level (with both, the larger applies)"},
		{"error-model", "error_model", "constant, proportional or auto (default auto: from the replicates)"},
		{"lambda", "lambda", "error-variance ratio var(y error)/var(x error) (default: from the replicates)"},
		{"seed", "seed", "bootstrap seed"},
		{"scheme", "scheme", "bootstrap scheme: pairs or parametric"},
		{"exclude", "exclude", "comma list of sample ids to leave out (the analysis is shown with and without them)"},
		{"x-name", "x_name", "name of the comparative method"},
		{"y-name", "y_name", "name of the candidate method"},
		{"unit", "unit", "unit of measurement"},
	} {
		strs[f.param] = fs.String(f.name, "", f.usage)
	}
	confidence := fs.Float64("confidence", 0.95, "confidence level of the intervals")
	resamples := fs.Int("resamples", 0, "bootstrap resamples (0 = none)")
	format := fs.String("format", "json", "output format: json or text")
	pretty := fs.Bool("pretty", false, "indent the JSON")
	file, done, err := parseFileArgs(fs, args, "compare", format, stderr)
	if done {
		return err
	}
	if err := api.CheckConfidence(*confidence); err != nil {
		fmt.Fprintf(stderr, "eivfit compare: --confidence: %v\n", err)
		return exitError{2}
	}
	q := url.Values{}
	for k, v := range strs {
		if *v != "" {
			q.Set(k, *v)
		}
	}
	q.Set("confidence", strconv.FormatFloat(*confidence, 'g', -1, 64))
	if *resamples != 0 {
		q.Set("resamples", strconv.Itoa(*resamples))
	}
	in, name, err := openInput(file, stdin, "compare", stderr)
	if err != nil {
		return err
	}
	defer in.Close()
	resp, err := api.CompareCSV(ctx, in, q, api.DefaultSettings)
	if err != nil {
		return reportProblem(stderr, name, err)
	}
	return writeOutput(stdout, *format, *pretty, resp, func(w io.Writer) error { return api.WriteCompareText(w, resp) })
}
