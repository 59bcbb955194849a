package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"strconv"
	"strings"
	"text/tabwriter"

	"eivfit/api/wire"
	"eivfit/eiv/study"
)

const planUsage = `Usage: eivfit plan [flags] [FILE]

Plans a method-comparison study by simulation: for each candidate number of
samples, how often each verdict comes out at the decision levels, how wide
the bias interval is, and the power to show a slope different from 1 and an
intercept different from 0. FILE is a JSON request as for POST /v1/plan
("-" reads standard input); without FILE the flags state the plan. The JSON
output is the same bytes as the service's.

Example:
  eivfit plan --low 3 --high 25 --error-x 0.1,2.5 --lambda 1 --replicates 2 \
    --sizes 40,60,100 --differences 0:2 --decision-levels 7,11.1 --allowable-percent 5

Flags:
`

// runPlan builds the same request as POST /v1/plan (from FILE or from the
// flags), runs the same study and prints the same JSON.
func runPlan(ctx context.Context, args []string, stdin io.Reader, stdout, stderr io.Writer) error {
	fs := flag.NewFlagSet("plan", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.Usage = func() {
		fmt.Fprint(stderr, planUsage)
		fs.PrintDefaults()
	}
	str := func(name, usage string) *string { return fs.String(name, "", usage) }
	low := str("low", "low end of the measuring range")
	high := str("high", "high end of the measuring range")
	spread := str("spread", "how the samples spread over the range: uniform, log_uniform or levels")
	levels := str("levels", "comma list of target levels (spread levels)")
	errX := str("error-x", "comparative method's error: SD[,CV%] (e.g. 0.1,2.5)")
	errY := str("error-y", "candidate's error: SD[,CV%] (or give --lambda)")
	lambda := str("lambda", "error-variance ratio var(y error)/var(x error), instead of --error-y")
	reps := str("replicates", "measurements per sample: N for both methods, or X,Y")
	sizes := str("sizes", "comma list of candidate numbers of samples")
	power := str("target-power", "target power, e.g. 0.8: find the smallest n")
	target := str("target", "what the target power applies to: slope, intercept or verdict")
	maxN := fs.Int("max-n", 0, "largest n searched for the target power")
	diffs := str("differences", "comma list of true differences CONSTANT:PERCENT (e.g. 0:2 for 2 % proportional)")
	noDiff := fs.Bool("no-difference", false, "add \"no difference\" as the first scenario")
	dl := str("decision-levels", "comma list of levels at which bias is judged")
	absolute := str("allowable-absolute", "allowable bias in units of the measurand")
	percent := str("allowable-percent", "allowable bias in percent of the level (with both, the larger applies)")
	estimator := str("estimator", "deming (default), weighted_deming or passing_bablok")
	confidence := str("confidence", "confidence level of the intervals (default 0.95)")
	trials := fs.Int("trials", 0, "simulated studies per size and scenario (default 1000)")
	seed := str("seed", "seed of the simulation (default 1)")
	unit := str("unit", "unit of the measurand")
	format := fs.String("format", "json", "output format: json or text")
	pretty := fs.Bool("pretty", false, "indent the JSON")
	strict := newStrictFlags(fs, []string{"sizes", "differences"}, []string{"levels", "decision-levels"})
	var files []string
	for {
		if err := fs.Parse(args); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				return nil
			}
			return exitError{2}
		}
		if fs.NArg() == 0 {
			break
		}
		files = append(files, fs.Arg(0))
		args = fs.Args()[1:]
	}
	if err := strict.check(); err != nil {
		return usageError(stderr, "plan", err)
	}
	if *format != "json" && *format != "text" {
		return usageError(stderr, "plan", fmt.Errorf("--format must be json or text, not %q", *format))
	}
	var req *wire.PlanRequest
	name := "plan"
	switch len(files) {
	case 0:
		var err error
		if req, err = planFromFlags(planFlagValues{low: *low, high: *high, spread: *spread, levels: *levels, errX: *errX, errY: *errY,
			lambda: *lambda, reps: *reps, sizes: *sizes, power: *power, target: *target, maxN: *maxN, diffs: *diffs, noDiff: *noDiff,
			dl: *dl, absolute: *absolute, percent: *percent, estimator: *estimator, confidence: *confidence, trials: *trials,
			seed: *seed, unit: *unit}); err != nil {
			return usageError(stderr, "plan", err)
		}
	case 1:
		var extra []string
		fs.Visit(func(f *flag.Flag) {
			if f.Name != "format" && f.Name != "pretty" {
				extra = append(extra, "--"+f.Name)
			}
		})
		if len(extra) > 0 {
			return usageError(stderr, "plan", fmt.Errorf("a JSON file states the whole plan: %s would be ignored; put it in the file", strings.Join(extra, ", ")))
		}
		in, n, err := openInput(files[0], stdin, "plan", stderr)
		if err != nil {
			return err
		}
		defer in.Close()
		name = n
		if req, err = wire.DecodePlanJSON(in); err != nil {
			return reportProblem(stderr, name, err)
		}
	default:
		return usageError(stderr, "plan", errors.New("name at most one JSON file (or - for standard input)"))
	}
	src := req.Source()
	if len(files) == 0 {
		src = src.AsFlags()
	}
	res, err := study.Plan(ctx, req.Options(study.Settings{Limits: study.DefaultLimits}))
	if err != nil {
		return reportProblem(stderr, name, src.Problem(err))
	}
	resp := wire.NewPlanResponse(req, res)
	return writeOutput(stdout, stderr, name, src, *format, *pretty, resp, func(w io.Writer) error { return writePlanText(w, resp) })
}

type planFlagValues struct {
	low, high, spread, levels, errX, errY, lambda, reps, sizes, power, target string
	maxN                                                                      int
	diffs                                                                     string
	noDiff                                                                    bool
	dl, absolute, percent, estimator, confidence                              string
	trials                                                                    int
	seed, unit                                                                string
}

// planFromFlags builds the request the flags state.
func planFromFlags(v planFlagValues) (*wire.PlanRequest, error) {
	req := &wire.PlanRequest{Spread: v.spread, Target: v.target, MaxN: v.maxN, NoDifference: v.noDiff, Estimator: v.estimator,
		Trials: v.trials, Unit: v.unit}
	var err error
	num := func(name, s string, dst **float64) {
		if err == nil {
			*dst, err = flagFloat(name, s)
		}
	}
	num("low", v.low, &req.Low)
	num("high", v.high, &req.High)
	num("lambda", v.lambda, &req.Lambda)
	num("target-power", v.power, &req.TargetPower)
	num("confidence", v.confidence, &req.Confidence)
	var abs, pct *float64
	num("allowable-absolute", v.absolute, &abs)
	num("allowable-percent", v.percent, &pct)
	if err != nil {
		return nil, err
	}
	if abs != nil || pct != nil {
		req.AllowableBias = &wire.Allowable{Absolute: abs, Percent: pct}
	}
	list := func(name, s string) ([]float64, error) {
		var out []float64
		for _, f := range wire.SplitList(s) {
			p, err := flagFloat(name, f)
			if err != nil {
				return nil, err
			}
			out = append(out, *p)
		}
		return out, nil
	}
	if req.Levels, err = list("levels", v.levels); err != nil {
		return nil, err
	}
	lv, err := list("decision-levels", v.dl)
	if err != nil {
		return nil, err
	}
	for _, l := range lv {
		req.DecisionLevels = append(req.DecisionLevels, wire.DecisionLevel{Level: l})
	}
	for _, f := range wire.SplitList(v.sizes) {
		n, err := strconv.Atoi(f)
		if err != nil {
			return nil, fmt.Errorf("--sizes: %q is not a whole number", f)
		}
		req.Sizes = append(req.Sizes, n)
	}
	errSpec := func(name, s string) (*wire.PlanError, error) {
		if s == "" {
			return nil, nil
		}
		p, err := list(name, s)
		if err != nil || len(p) > 2 || len(p) == 0 {
			return nil, fmt.Errorf("--%s must be SD or SD,CV%% (e.g. 0.1,2.5)", name)
		}
		e := &wire.PlanError{SD: p[0]}
		if len(p) == 2 {
			e.CVPercent = p[1]
		}
		return e, nil
	}
	if req.ErrorX, err = errSpec("error-x", v.errX); err != nil {
		return nil, err
	}
	if req.ErrorY, err = errSpec("error-y", v.errY); err != nil {
		return nil, err
	}
	if v.reps != "" {
		var r []int
		for _, f := range wire.SplitList(v.reps) {
			n, err := strconv.Atoi(f)
			if err != nil {
				return nil, fmt.Errorf("--replicates: %q is not a whole number", f)
			}
			r = append(r, n)
		}
		switch len(r) {
		case 1:
			req.Replicates = &wire.PlanReplicates{X: r[0], Y: r[0]}
		case 2:
			req.Replicates = &wire.PlanReplicates{X: r[0], Y: r[1]}
		default:
			return nil, errors.New("--replicates must be N or X,Y")
		}
	}
	for _, f := range wire.SplitList(v.diffs) {
		c, p, ok := strings.Cut(f, ":")
		cv, err1 := flagFloat("differences", c)
		pv, err2 := flagFloat("differences", p)
		if !ok || err1 != nil || err2 != nil || cv == nil || pv == nil {
			return nil, fmt.Errorf("--differences: %q is not CONSTANT:PERCENT (e.g. 0:2)", f)
		}
		req.Differences = append(req.Differences, wire.PlanDifference{Constant: *cv, ProportionalPercent: *pv})
	}
	if v.seed != "" {
		s, err := strconv.ParseUint(v.seed, 10, 64)
		if err != nil {
			return nil, fmt.Errorf("--seed must be a non-negative whole number, not %q", v.seed)
		}
		req.Seed = &s
	}
	return req, nil
}

// writePlanText writes a plan for a terminal: the sentence, then per
// scenario and size the powers and the verdict shares at each level.
func writePlanText(w io.Writer, r *wire.PlanResponse) error {
	var b strings.Builder
	fmt.Fprintf(&b, "%s\n\n", r.Sentence)
	fmt.Fprintf(&b, "Estimator %s, %d trials per size (seed %d), intervals at %g %%", r.Estimator, r.Trials, r.Seed, 100*r.Confidence)
	if r.SmallestN != nil {
		fmt.Fprintf(&b, "; smallest n with %s power ≥ %g: %d", r.Target, *r.TargetPower, *r.SmallestN)
	}
	b.WriteString("\n")
	for _, sc := range r.Scenarios {
		fmt.Fprintf(&b, "\nTrue difference: %g %+g %% of the level\n", sc.Difference.Constant, sc.Difference.ProportionalPercent)
		tw := tabwriter.NewWriter(&b, 0, 0, 2, ' ', 0)
		fmt.Fprintln(tw, "  n\tslope power\tintercept power\tlevel\ttrue bias\twithin\texceeds\tinconclusive\thalf-width\tcoverage")
		for _, s := range sc.Sizes {
			if len(s.Levels) == 0 {
				fmt.Fprintf(tw, "  %d\t%.3f\t%.3f\t-\t-\t-\t-\t-\t-\t-\n", s.N, s.SlopePower, s.InterceptPower)
			}
			for k, l := range s.Levels {
				pw := fmt.Sprintf("  %d\t%.3f\t%.3f", s.N, s.SlopePower, s.InterceptPower)
				if k > 0 {
					pw = "  \t\t"
				}
				fmt.Fprintf(tw, "%s\t%g\t%.4g\t%.3f\t%.3f\t%.3f\t%.4g\t%.3f\n", pw, l.Level, l.TrueBias, l.Within, l.Exceeds, l.Inconclusive, l.HalfWidth, l.Coverage)
			}
		}
		_ = tw.Flush()
	}
	for _, wn := range r.Warnings {
		fmt.Fprintf(&b, "\nWarning: %s\n", wn.Message)
	}
	_, err := io.WriteString(w, b.String())
	return err
}
