package api

import (
	"encoding/json"
	"fmt"
	"io"
	"strings"
	"text/tabwriter"
)

// WriteJSON writes v as the service writes every JSON answer: indented by
// two spaces, HTML characters unescaped, one trailing newline. The CLI uses
// it too, so both print the same bytes.
func WriteJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	enc.SetEscapeHTML(false)
	return enc.Encode(v)
}

// WriteText writes a fit as a table for a terminal.
func WriteText(w io.Writer, r *FitResponse) error {
	var b strings.Builder
	fmt.Fprintf(&b, "n = %d, intervals at %g %%\n\n", r.N, 100*r.Confidence)
	tw := tabwriter.NewWriter(&b, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "method\tslope\tse\tCI\tintercept\tse\tCI\tnotes")
	row := func(name string, f *MethodFit) {
		if f == nil {
			return
		}
		var notes []string
		if f.Lambda != nil {
			notes = append(notes, fmt.Sprintf("λ = %.4g (%s)", *f.Lambda, f.LambdaSource))
		}
		if f.RSquared != nil {
			notes = append(notes, fmt.Sprintf("R² = %.6g", *f.RSquared))
		}
		if f.MSWD != nil {
			notes = append(notes, fmt.Sprintf("MSWD = %.4g, p = %.3g", *f.MSWD, *f.PValue))
		}
		fmt.Fprintf(tw, "%s\t%.6g\t%.4g\t[%.6g, %.6g]\t%.6g\t%.4g\t[%.6g, %.6g]\t%s\n", name,
			f.Slope.Estimate, f.Slope.SE, f.Slope.CI.Lower, f.Slope.CI.Upper,
			f.Intercept.Estimate, f.Intercept.SE, f.Intercept.CI.Lower, f.Intercept.CI.Upper,
			strings.Join(notes, "; "))
		if j := f.Jackknife; j != nil {
			fmt.Fprintf(tw, "  jackknife\t\t%.4g\t[%.6g, %.6g]\t\t%.4g\t[%.6g, %.6g]\t\n",
				j.Slope.SE, j.Slope.CI.Lower, j.Slope.CI.Upper, j.Intercept.SE, j.Intercept.CI.Lower, j.Intercept.CI.Upper)
		}
		if bs := f.Bootstrap; bs != nil {
			fmtB := func(p BootParamOut) string {
				if p.BCa != nil {
					return fmt.Sprintf("[%.6g, %.6g]", p.BCa.Lower, p.BCa.Upper)
				}
				if p.Percentile != nil {
					return fmt.Sprintf("[%.6g, %.6g] pct", p.Percentile.Lower, p.Percentile.Upper)
				}
				return "refused"
			}
			fmt.Fprintf(tw, "  bootstrap BCa\t\t%.4g\t%s\t\t%.4g\t%s\tB = %d, seed %d, %s\n",
				bs.Slope.SE, fmtB(bs.Slope), bs.Intercept.SE, fmtB(bs.Intercept), bs.Resamples, bs.Seed, bs.Scheme)
		}
	}
	row("ols", r.Fits.OLS)
	row("deming", r.Fits.Deming)
	row("weighted_deming", r.Fits.WeightedDeming)
	row("york", r.Fits.York)
	if err := tw.Flush(); err != nil {
		return err
	}
	for _, name := range []struct {
		n string
		f *MethodFit
	}{{"ols", r.Fits.OLS}, {"deming", r.Fits.Deming}, {"weighted_deming", r.Fits.WeightedDeming}, {"york", r.Fits.York}} {
		if name.f == nil || len(name.f.At) == 0 {
			continue
		}
		fmt.Fprintf(&b, "\n%s at decision levels:\n", name.n)
		tw = tabwriter.NewWriter(&b, 0, 0, 2, ' ', 0)
		fmt.Fprintln(tw, "  x\tfitted y\tCI\tbias y − x\tCI")
		for _, a := range name.f.At {
			fmt.Fprintf(tw, "  %g\t%.6g\t[%.6g, %.6g]\t%.4g\t[%.4g, %.4g]\n", a.X, a.Y.Estimate, a.Y.CI.Lower, a.Y.CI.Upper,
				a.Bias.Estimate, a.Bias.CI.Lower, a.Bias.CI.Upper)
		}
		if err := tw.Flush(); err != nil {
			return err
		}
	}
	if len(r.OLSBias) > 0 {
		b.WriteString("\nHow far OLS is off:\n")
		for _, c := range r.OLSBias {
			fmt.Fprintf(&b, "  %s\n", c.Summary)
		}
	}
	if len(r.Warnings) > 0 {
		b.WriteString("\nWarnings:\n")
		for _, wn := range r.Warnings {
			if wn.Method != "" {
				fmt.Fprintf(&b, "  [%s] %s\n", wn.Method, wn.Message)
			} else {
				fmt.Fprintf(&b, "  %s\n", wn.Message)
			}
		}
	}
	_, err := io.WriteString(w, b.String())
	return err
}
