package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"net/url"
	"os"
	"strconv"

	"eivfit/api"
)

const fitUsage = `Usage: eivfit fit [flags] FILE

Fits straight lines to the CSV file FILE ("-" reads standard input). The
header row names the columns, in any order and any case: x and y are
required; sx and sy (standard uncertainties, 1 SD), r (error correlation),
id and order are optional. Lines starting with # are comments.

Flags:
`

// runFit builds the same request as POST /v1/fit with a CSV body and the
// flags as query parameters, and prints the same JSON.
func runFit(ctx context.Context, args []string, stdin io.Reader, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("fit", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.Usage = func() {
		fmt.Fprint(stderr, fitUsage)
		fs.PrintDefaults()
	}
	methods := fs.String("methods", "", "comma list of ols, deming, weighted_deming, york (default: every method the data support)")
	lambda := fs.String("lambda", "", "error-variance ratio var(y error)/var(x error) for Deming (default: from sx and sy, else 1)")
	confidence := fs.Float64("confidence", 0.95, "confidence level of the intervals")
	format := fs.String("format", "json", "output format: json or text")
	pretty := fs.Bool("pretty", false, "indent the JSON")
	resamples := fs.Int("resamples", 0, "bootstrap resamples (0 = no bootstrap)")
	seed := fs.String("seed", "", "bootstrap seed (default: drawn at random and reported)")
	scheme := fs.String("scheme", "", "bootstrap scheme: pairs (default) or parametric")
	at := fs.String("at", "", "comma list of x values (decision levels) for predictions and bias")

	file, done, err := parseFileArgs(fs, args, "fit", format, stderr)
	if done {
		return err
	}
	if err := api.CheckConfidence(*confidence); err != nil {
		fmt.Fprintf(stderr, "eivfit fit: --confidence: %v\n", err)
		return exitError{2}
	}
	q := url.Values{}
	set := func(k, v string) {
		if v != "" {
			q.Set(k, v)
		}
	}
	set("methods", *methods)
	set("lambda", *lambda)
	set("confidence", strconv.FormatFloat(*confidence, 'g', -1, 64))
	if *resamples != 0 {
		set("resamples", strconv.Itoa(*resamples))
	}
	set("seed", *seed)
	set("scheme", *scheme)
	set("at", *at)

	in, name, err := openInput(file, stdin, "fit", stderr)
	if err != nil {
		return err
	}
	defer in.Close()
	resp, err := api.FitCSV(ctx, in, q, api.DefaultSettings)
	if err != nil {
		return reportProblem(stderr, name, err)
	}
	return writeOutput(stdout, *format, *pretty, resp, func(w io.Writer) error { return api.WriteText(w, resp) })
}

// parseFileArgs parses flags that may stand before or after the one FILE
// argument, and checks --format. done is true when the command should stop
// (help shown, or an error already reported) with err.
func parseFileArgs(fs *flag.FlagSet, args []string, cmd string, format *string, stderr io.Writer) (file string, done bool, err error) {
	var files []string
	for {
		if err := fs.Parse(args); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				return "", true, nil
			}
			return "", true, exitError{2}
		}
		if fs.NArg() == 0 {
			break
		}
		files = append(files, fs.Arg(0))
		args = fs.Args()[1:]
	}
	if len(files) != 1 {
		fmt.Fprintf(stderr, "eivfit %s: name exactly one CSV file (or - for standard input)\n", cmd)
		fs.Usage()
		return "", true, exitError{2}
	}
	if *format != "json" && *format != "text" {
		fmt.Fprintf(stderr, "eivfit %s: --format must be json or text, not %q\n", cmd, *format)
		return "", true, exitError{2}
	}
	return files[0], false, nil
}

// openInput opens FILE, "-" meaning stdin; the caller closes it.
func openInput(name string, stdin io.Reader, cmd string, stderr io.Writer) (io.ReadCloser, string, error) {
	if name == "-" {
		return io.NopCloser(stdin), "standard input", nil
	}
	f, err := os.Open(name)
	if err != nil {
		fmt.Fprintf(stderr, "eivfit %s: %v\n", cmd, err)
		return nil, "", exitError{2}
	}
	return f, name, nil
}

// writeOutput prints the answer as text, indented JSON or JSON.
func writeOutput(stdout io.Writer, format string, pretty bool, v any, text func(io.Writer) error) error {
	switch {
	case format == "text":
		return text(stdout)
	case pretty:
		return api.WritePrettyJSON(stdout, v)
	}
	return api.WriteJSON(stdout, v)
}

// reportProblem prints a problem with every offending place, and returns
// exit status 2 for bad input.
func reportProblem(stderr io.Writer, name string, err error) error {
	var p *api.Problem
	if !errors.As(err, &p) {
		fmt.Fprintf(stderr, "eivfit: %s: %v\n", name, err)
		return exitError{1}
	}
	fmt.Fprintf(stderr, "eivfit: %s: %s\n", name, p.Title)
	for _, e := range p.Errors {
		fmt.Fprintf(stderr, "  %s: %s\n", e.Pointer, e.Detail)
	}
	if len(p.Errors) == 0 && p.Detail != "" {
		fmt.Fprintf(stderr, "  %s\n", p.Detail)
	}
	return exitError{2}
}
