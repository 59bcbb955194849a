package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"net/url"
	"strings"

	"eivfit/api/report"
	"eivfit/api/wire"
	"eivfit/eiv/study"
)

const calibrateUsage = `Usage: eivfit calibrate [flags] FILE

Calibrates against reference standards and evaluates unknowns, from the CSV
file FILE ("-" reads standard input). The header names the columns: role
(standard or unknown), id, x and ux (the standards' assigned values and
their standard uncertainties), y or y1, y2, ... (readings; replicates), uy
(standard uncertainty of one reading; leave it out to use the replicate SD)
and r. A unit may follow x or y in parentheses: "x (umol/mol)".

Flags:
`

// runCalibrate builds the same request as POST /v1/calibration with a CSV
// body (the flags become its query parameters) and prints the same JSON.
func runCalibrate(ctx context.Context, args []string, stdin io.Reader, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("calibrate", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.Usage = func() {
		fmt.Fprint(stderr, calibrateUsage)
		fs.PrintDefaults()
	}
	usage := map[string]string{
		"model":                "wls, gdr or gmr (default: from the data)",
		"on_inconsistent":      "report (default), inflate or refuse, when the validation fails",
		"coverage_factor":      "coverage factor k (default 2)",
		"coverage_probability": "coverage probability p (k from t on the effective degrees of freedom)",
		"confidence":           "probability of the χ² quantile of the validation (default 0.95)",
		"trials":               "Monte Carlo trials per unknown (JCGM 101; default none, 1000000 when --seed is given)",
		"seed":                 "Monte Carlo seed (default: drawn at random and reported)",
		"forward":              "comma list of x values at which to evaluate the line",
		"x_name":               "name of x (the standards' assigned values)",
		"y_name":               "name of y (the instrument's response)",
		"x_unit":               "unit of x",
		"y_unit":               "unit of y",
		"shared_name":          "name of a component shared by several standards",
		"shared_relative_u":    "its relative standard uncertainty (e.g. 0.002)",
		"shared_standards":     "comma list of the ids of the standards that share it",
	}
	vals := map[string]*string{}
	for _, name := range wire.CalibrationQueryParameters {
		vals[name] = fs.String(strings.ReplaceAll(name, "_", "-"), "", usage[name])
	}
	format := fs.String("format", "json", "output format: json or text")
	pretty := fs.Bool("pretty", false, "indent the JSON")
	sv := addSaveFlags(fs)
	file, done, err := parseFileArgs(fs, args, "calibrate", format, stderr)
	if done {
		return err
	}
	if err := sv.check(setFlags(fs)); err != nil {
		return usageError(stderr, "calibrate", err)
	}
	if sv.save {
		return sv.run(ctx, saveRun{cmd: "calibrate", path: "/v1/calibration", format: *format, pretty: *pretty,
			text: textOf(report.WriteCalibrationText)}, fs, file, stdin, stdout, stderr)
	}
	q := url.Values{}
	for name, v := range vals {
		if *v != "" {
			q.Set(name, *v)
		}
	}
	in, name, err := openInput(file, stdin, "calibrate", stderr)
	if err != nil {
		return err
	}
	defer in.Close()
	req, err := wire.CalibrationFromCSV(in, q)
	if err != nil {
		return reportProblem(stderr, name, asFlags(err))
	}
	src := req.Source().AsFlags()
	res, err := study.Calibrate(ctx, req.Data, req.Options(study.Settings{Limits: study.DefaultLimits}))
	if err != nil {
		return reportProblem(stderr, name, src.Problem(err))
	}
	resp := wire.NewCalibrationResponse(req, res)
	return writeOutput(stdout, stderr, name, src, *format, *pretty, resp, func(w io.Writer) error {
		return report.WriteCalibrationText(w, resp)
	})
}

// asFlags renames the query parameters of a problem as the flags they came from.
func asFlags(err error) error {
	var p *wire.Problem
	if !errors.As(err, &p) {
		return err
	}
	q := *p
	q.Errors = make([]wire.FieldError, len(p.Errors))
	for i, e := range p.Errors {
		if name, ok := strings.CutPrefix(e.Pointer, "query parameter "); ok {
			e.Pointer = "--" + strings.ReplaceAll(name, "_", "-")
		}
		q.Errors[i] = e
	}
	return &q
}
