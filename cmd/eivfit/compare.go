package main

import (
	"context"
	"flag"
	"fmt"
	"io"

	"eivfit/api/report"
	"eivfit/api/wire"
	"eivfit/eiv/study"
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
	str := func(name, usage string) *string { return fs.String(name, "", usage) }
	levels := str("decision-levels", "comma list of x values at which bias is judged")
	absolute := str("allowable-absolute", "allowable bias in units of x")
	percent := str("allowable-percent", "allowable bias in percent of the level (with both, the larger applies)")
	errorModel := str("error-model", "constant, proportional or auto (default auto: from the replicates)")
	lambda := str("lambda", "error-variance ratio var(y error)/var(x error) (default: from the replicates)")
	seed := str("seed", "bootstrap seed")
	scheme := str("scheme", "bootstrap scheme: pairs or parametric")
	exclude := str("exclude", "comma list of sample ids to leave out (the analysis is shown with and without them)")
	xName := str("x-name", "name of the comparative method")
	yName := str("y-name", "name of the candidate method")
	unit := str("unit", "unit of measurement")
	confidence := new(float64)
	fs.Float64Var(confidence, "confidence", 0.95, "confidence level of the intervals")
	resamples := fs.Int("resamples", 0, "bootstrap resamples (0 = none)")
	format := fs.String("format", "json", "output format: json or text")
	pretty := fs.Bool("pretty", false, "indent the JSON")
	csvf := addCSVFlags(fs)
	sv := addSaveFlags(fs)
	strict := newStrictFlags(fs, []string{"exclude"}, []string{"decision-levels"})
	file, done, err := parseFileArgs(fs, args, "compare", format, stderr)
	if done {
		return err
	}
	if err := strict.check(); err != nil {
		return usageError(stderr, "compare", err)
	}
	opts := &wire.CompareRequest{XName: *xName, YName: *yName, Unit: *unit, ErrorModel: *errorModel,
		Confidence: confidence, Exclude: wire.SplitList(*exclude)}
	if opts.Lambda, err = flagFloat("lambda", *lambda); err != nil {
		return usageError(stderr, "compare", err)
	}
	abs, err := flagFloat("allowable-absolute", *absolute)
	if err != nil {
		return usageError(stderr, "compare", err)
	}
	pct, err := flagFloat("allowable-percent", *percent)
	if err != nil {
		return usageError(stderr, "compare", err)
	}
	if abs != nil || pct != nil {
		opts.AllowableBias = &wire.Allowable{Absolute: abs, Percent: pct}
	}
	for _, f := range wire.SplitList(*levels) {
		v, err := flagFloat("decision-levels", f)
		if err != nil {
			return usageError(stderr, "compare", err)
		}
		opts.DecisionLevels = append(opts.DecisionLevels, wire.DecisionLevel{Level: *v})
	}
	if opts.Bootstrap, err = bootstrapFlags(*resamples, *seed, *scheme); err != nil {
		return usageError(stderr, "compare", err)
	}
	o, err := csvf.options()
	if err != nil {
		return usageError(stderr, "compare", err)
	}
	if err := sv.check(setFlags(fs)); err != nil {
		return usageError(stderr, "compare", err)
	}
	if err := csvf.checkGroupFlags(sv.save, o); err != nil {
		return usageError(stderr, "compare", err)
	}
	if sv.save {
		return sv.run(ctx, saveRun{cmd: "compare", path: "/v1/method-comparison", format: *format, pretty: *pretty,
			text: textOf(report.WriteCompareText)}, fs, file, stdin, stdout, stderr)
	}
	in, name, err := openInput(file, stdin, "compare", stderr)
	if err != nil {
		return err
	}
	defer in.Close()
	groups, err := wire.DecodeCompareCSVGroups(in, o)
	if err != nil {
		return reportProblem(stderr, name, err)
	}
	run := func(req, opts *wire.CompareRequest) (*wire.CompareResponse, error) {
		req.SetOptions(opts)
		if err := req.TakeUnit("--unit"); err != nil {
			return nil, err
		}
		res, err := study.Compare(ctx, req.Samples, req.Options(study.Settings{Limits: study.DefaultLimits}))
		if err != nil {
			return nil, req.Source().AsFlags().Problem(err)
		}
		return wire.NewCompareResponse(req, res), nil
	}
	if o.GroupBy != "" {
		names := make([]string, len(groups))
		for i, g := range groups {
			names[i] = g.Name
		}
		per, err := csvf.groups(o, wire.DatasetComparison, names)
		if err != nil {
			return usageError(stderr, "compare", err)
		}
		out := &wire.BatchResponse{}
		for _, g := range groups {
			resp, err := run(g.Req, per.Compare(g.Name, opts))
			out.Results = append(out.Results, groupResult(g.Name, resp, err, nil))
		}
		tally(out)
		return writeGroups(stdout, stderr, name, *format, *pretty, out, func(w io.Writer, r *wire.BatchResult) error { return report.WriteCompareText(w, r.Comparison) })
	}
	req := groups[0].Req
	resp, err := run(req, opts)
	if err != nil {
		return reportProblem(stderr, name, err)
	}
	return writeOutput(stdout, stderr, name, req.Source().AsFlags(), *format, *pretty, resp, func(w io.Writer) error { return report.WriteCompareText(w, resp) })
}
