package main

import (
	"bytes"
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"runtime"
	"runtime/debug"
	"strconv"
	"sync"

	"eivfit/api/report"
	"eivfit/api/wire"
	"eivfit/eiv/study"
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
	confidence := new(float64)
	fs.Float64Var(confidence, "confidence", 0.95, "confidence level of the intervals")
	format := fs.String("format", "json", "output format: json or text")
	pretty := fs.Bool("pretty", false, "indent the JSON")
	resamples := fs.Int("resamples", 0, "bootstrap resamples (0 = no bootstrap)")
	seed := fs.String("seed", "", "bootstrap seed (default: drawn at random and reported)")
	scheme := fs.String("scheme", "", "bootstrap scheme: pairs (default) or parametric")
	at := fs.String("at", "", "comma list of x values (decision levels) for predictions and bias")
	xUnit := fs.String("x-unit", "", "unit of x")
	yUnit := fs.String("y-unit", "", "unit of y (when it differs from x's, nothing compares y with x: no bias y − x)")
	csvf := addCSVFlags(fs)
	sv := addSaveFlags(fs)
	strict := newStrictFlags(fs, []string{"methods"}, []string{"at"})

	file, done, err := parseFileArgs(fs, args, "fit", format, stderr)
	if done {
		return err
	}
	if err := strict.check(); err != nil {
		return usageError(stderr, "fit", err)
	}
	req := &wire.FitRequest{Methods: wire.SplitList(*methods), Confidence: confidence, At: nil}
	if req.Lambda, err = flagFloat("lambda", *lambda); err != nil {
		return usageError(stderr, "fit", err)
	}
	for _, f := range wire.SplitList(*at) {
		v, err := flagFloat("at", f)
		if err != nil {
			return usageError(stderr, "fit", err)
		}
		req.At = append(req.At, *v)
	}
	if req.Bootstrap, err = bootstrapFlags(*resamples, *seed, *scheme); err != nil {
		return usageError(stderr, "fit", err)
	}
	o, err := csvf.options()
	if err != nil {
		return usageError(stderr, "fit", err)
	}
	if err := sv.check(setFlags(fs)); err != nil {
		return usageError(stderr, "fit", err)
	}
	if err := csvf.checkGroupFlags(sv.save, o); err != nil {
		return usageError(stderr, "fit", err)
	}
	if sv.save {
		return sv.run(ctx, saveRun{cmd: "fit", path: "/v1/fit", format: *format, pretty: *pretty, text: textOf(report.WriteText)},
			fs, file, stdin, stdout, stderr)
	}
	groups, name, err := decodeFitInput(file, stdin, o, stderr)
	if err != nil {
		return err
	}
	req.XUnit, req.YUnit = *xUnit, *yUnit
	fit := func(g wire.CSVGroup, req *wire.FitRequest) (*wire.FitRequest, *wire.FitResponse, error) {
		r := *req
		r.Points = *g.Data
		r.TakeUnits()
		src := r.Source().AsFlags()
		res, err := study.Fit(ctx, g.Data.Data, r.Options(study.Settings{Limits: study.DefaultLimits}))
		if err != nil {
			return &r, nil, src.Problem(err)
		}
		return &r, r.Response(res), nil
	}
	if o.GroupBy != "" {
		names := make([]string, len(groups))
		for i, g := range groups {
			names[i] = g.Name
		}
		per, err := csvf.groups(o, wire.DatasetFit, names)
		if err != nil {
			return usageError(stderr, "fit", err)
		}
		out := &wire.BatchResponse{}
		for _, g := range groups {
			_, resp, err := fit(g, per.Fit(g.Name, req))
			out.Results = append(out.Results, groupResult(g.Name, resp, err, nil))
		}
		tally(out)
		return writeGroups(stdout, stderr, name, *format, *pretty, out, func(w io.Writer, r *wire.BatchResult) error { return report.WriteText(w, r.Fit) })
	}
	r, resp, err := fit(groups[0], req)
	if err != nil {
		return reportProblem(stderr, name, err)
	}
	return writeOutput(stdout, stderr, name, r.Source().AsFlags(), *format, *pretty, resp, func(w io.Writer) error { return report.WriteText(w, resp) })
}

// flagFloat reads an optional finite number given to flag name.
func flagFloat(name, s string) (*float64, error) {
	if s == "" {
		return nil, nil
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return nil, fmt.Errorf("--%s: %q is not a finite number", name, s)
	}
	return &v, nil
}

// bootstrapFlags builds the bootstrap options from their flags; nil when
// none is given.
func bootstrapFlags(resamples int, seed, scheme string) (*wire.BootstrapOptions, error) {
	if resamples == 0 && seed == "" && scheme == "" {
		return nil, nil
	}
	b := &wire.BootstrapOptions{Resamples: resamples, Scheme: scheme}
	if seed != "" {
		v, err := strconv.ParseUint(seed, 10, 64)
		if err != nil {
			return nil, fmt.Errorf("--seed: %q is not a non-negative integer", seed)
		}
		b.Seed = &v
	}
	return b, nil
}

// usageError reports a flag's bad value, exit status 2.
func usageError(stderr io.Writer, cmd string, err error) error {
	fmt.Fprintf(stderr, "eivfit %s: %v\n", cmd, err)
	return exitError{2}
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

// decodeFitInput reads the fit CSV in FILE ("-": standard input): a large
// plain file straight from the disk in parallel parts (wire.DecodeCSVAt),
// else read whole and decoded; the answer is the same either way. An
// error is already reported.
func decodeFitInput(file string, stdin io.Reader, o *wire.CSVOptions, stderr io.Writer) ([]wire.CSVGroup, string, error) {
	// What decoding allocates (the body, the columns) stays live until it
	// ends, so a collection meanwhile frees next to nothing: none runs. (A
	// layout read row by row leaves garbage of about the file's size, which
	// the next collection takes.) On the 10⁶-row file this saves two
	// collections started by the columns' allocation, 10 % of the run's CPU.
	defer debug.SetGCPercent(debug.SetGCPercent(-1))
	groups, ok, err := decodeFileInParts(file, o)
	if ok && err != nil {
		return nil, "", reportProblem(stderr, file, err)
	}
	if ok {
		return groups, file, nil
	}
	in, name, err := openInput(file, stdin, "fit", stderr)
	if err != nil {
		return nil, "", err
	}
	if groups, err = wire.DecodeCSVGroups(in, o); err != nil {
		return nil, "", reportProblem(stderr, name, err)
	}
	return groups, name, nil
}

// decodeFileInParts decodes a regular file of parallelReadMin bytes or
// more with wire.DecodeCSVAt; ok false leaves it (and any file it cannot
// open or state, whose error the whole read reports) to the whole read.
func decodeFileInParts(file string, o *wire.CSVOptions) (groups []wire.CSVGroup, ok bool, err error) {
	if file == "-" {
		return nil, false, nil
	}
	f, err := os.Open(file)
	if err != nil {
		return nil, false, nil
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil || !st.Mode().IsRegular() || st.Size() < parallelReadMin {
		return nil, false, nil
	}
	return wire.DecodeCSVAt(f, st.Size(), o)
}

// openInput reads FILE, "-" meaning stdin, whole into memory: a file into
// one buffer of its size, read once, which the decoders take without
// copying (a *wire.Body). Closing it does nothing.
func openInput(name string, stdin io.Reader, cmd string, stderr io.Writer) (io.ReadCloser, string, error) {
	if name == "-" {
		b, err := io.ReadAll(stdin)
		if err != nil {
			fmt.Fprintf(stderr, "eivfit %s: standard input: %v\n", cmd, err)
			return nil, "", exitError{2}
		}
		return wire.NewBody(b, nil), "standard input", nil
	}
	b, err := readInputFile(name)
	if err != nil {
		fmt.Fprintf(stderr, "eivfit %s: %v\n", cmd, err)
		return nil, "", exitError{2}
	}
	return wire.NewBody(b, nil), name, nil
}

// readInputFile reads a file into a buffer of the size it states, growing it
// only if the file grew meanwhile (or states no size, as a pipe).
func readInputFile(name string) ([]byte, error) {
	f, err := os.Open(name)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil {
		return nil, err
	}
	if st.IsDir() {
		return nil, fmt.Errorf("%s is a directory, not a file", name)
	}
	size := st.Size()
	if !st.Mode().IsRegular() || size <= 0 || size >= 1<<40 {
		return io.ReadAll(f)
	}
	b := make([]byte, size, size+1) // one spare byte finds growth at once
	if err := readAtParallel(f, b); err != nil {
		if errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) {
			return nil, fmt.Errorf("%s shrank while it was read", name)
		}
		return nil, err
	}
	if _, err := f.Seek(size, io.SeekStart); err != nil {
		return nil, err
	}
	rest, err := io.ReadAll(f)
	if err != nil {
		return nil, err
	}
	return append(b, rest...), nil
}

// parallelReadMin is the size from which a file is read in parallel parts:
// the kernel's copy into fresh pages (and their faults) then runs on every
// core, which for a 48 MB file took 27 ms on one core and 18 ms on two.
const parallelReadMin = 4 << 20

// readAtParallel fills b from the start of f, in 2 × GOMAXPROCS parts read
// at once above parallelReadMin; an error is io.EOF when f is shorter.
func readAtParallel(f *os.File, b []byte) error {
	parts := 1
	if len(b) >= parallelReadMin {
		parts = 2 * runtime.GOMAXPROCS(0)
	}
	errs := make([]error, parts)
	var wg sync.WaitGroup
	for i := range parts {
		lo, hi := len(b)*i/parts, len(b)*(i+1)/parts
		wg.Go(func() {
			if _, err := f.ReadAt(b[lo:hi], int64(lo)); err != nil {
				errs[i] = err
			}
		})
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	return nil
}

// writeOutput prints the answer as text, indented JSON or JSON; a number
// that is not finite is reported as unfittable data.
func writeOutput(stdout, stderr io.Writer, name string, src *wire.Source, format string, pretty bool, v any, text func(io.Writer) error) error {
	var b bytes.Buffer
	var err error
	switch {
	case format == "text":
		if _, err = wire.Marshal(v); err == nil {
			err = text(&b)
		}
	case pretty:
		err = wire.WritePrettyJSON(&b, v)
	default:
		err = wire.WriteJSON(&b, v)
	}
	if err != nil {
		return reportProblem(stderr, name, src.Problem(err))
	}
	_, err = stdout.Write(b.Bytes())
	return err
}

// reportProblem prints a problem with every offending place, and returns
// exit status 2 for bad input.
func reportProblem(stderr io.Writer, name string, err error) error {
	var p *wire.Problem
	if !errors.As(err, &p) {
		fmt.Fprintf(stderr, "eivfit: %s: %v\n", name, err)
		return exitError{1}
	}
	fmt.Fprintf(stderr, "eivfit: %s: %s\n", name, p.Title)
	if len(p.Errors) > 1 && p.Detail != "" {
		fmt.Fprintf(stderr, "  %s\n", p.Detail)
	}
	for _, e := range p.Errors {
		fmt.Fprintf(stderr, "  %s: %s\n", e.Pointer, e.Detail)
	}
	if len(p.Errors) == 0 && p.Detail != "" {
		fmt.Fprintf(stderr, "  %s\n", p.Detail)
	}
	return exitError{2}
}
