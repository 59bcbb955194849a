package study

import (
	"context"
	"fmt"
	"slices"
	"strings"

	"eivfit/eiv"
)

// Outcome sums up one fit's verdicts over the decision levels.
type Outcome struct {
	Method string
	// Levels counts the levels with a verdict; Within, Exceeds and
	// Inconclusive count each verdict.
	Levels, Within, Exceeds, Inconclusive int
	// Text is one sentence: "Passing–Bablok: within at 2 of 3 levels,
	// inconclusive at 11.1 mmol/L."
	Text string
}

// Robustness says whether each decision level's verdict holds under every
// fit the data allow (Deming, weighted Deming on positive data,
// Passing–Bablok) and without the flagged outliers.
type Robustness struct {
	// Fits names the fits judged; WithoutOutliers lists the ids (or
	// 1-based positions) of the outliers left out in the second set of
	// verdicts, empty when none was flagged.
	Fits            []string
	WithoutOutliers []string
	Levels          []RobustLevel
	// Reading is one sentence for all levels.
	Reading string
}

// RobustLevel is the verdicts at one decision level.
type RobustLevel struct {
	Level float64
	// Verdicts are one per fit, then (with outliers flagged) one per fit
	// without them.
	Verdicts []RobustVerdict
	// Holds says every verdict is the same.
	Holds bool
	// Reading says whether the recommended fit's verdict holds and, when
	// it does not, on which assumption it rests.
	Reading string
}

// RobustVerdict is one fit's verdict at a level, on all samples or
// without the flagged outliers.
type RobustVerdict struct {
	Method          string
	WithoutOutliers bool
	Verdict         string
}

// robustFits are the fits whose verdicts the robustness panel compares.
var robustFits = []string{"deming", "weighted_deming", "passing_bablok"}

// outcome sums up the recommended fit's verdicts.
func outcome(c *Comparison, unit string) *Outcome {
	name := c.Recommendation.Method
	out := &Outcome{Method: name}
	groups := map[string][]float64{}
	extrapolated := []float64{}
	for _, l := range c.DecisionLevels {
		i := slices.IndexFunc(l.Fits, func(f LevelFit) bool { return f.Method.Name == name })
		if i < 0 || l.Fits[i].Verdict == "" {
			continue
		}
		v := l.Fits[i].Verdict
		out.Levels++
		groups[v] = append(groups[v], l.Level)
		switch v {
		case eiv.VerdictWithin:
			out.Within++
		case eiv.VerdictExceeds:
			out.Exceeds++
		default:
			out.Inconclusive++
		}
		if l.Extrapolated {
			extrapolated = append(extrapolated, l.Level)
		}
	}
	if out.Levels == 0 {
		return nil
	}
	order := []string{eiv.VerdictWithin, eiv.VerdictExceeds, eiv.VerdictInconclusive}
	slices.SortStableFunc(order, func(a, b string) int { return len(groups[b]) - len(groups[a]) })
	var parts []string
	for k, v := range order {
		ls := groups[v]
		switch {
		case len(ls) == 0:
		case k == 0 && len(ls) == out.Levels && out.Levels == 1:
			parts = append(parts, fmt.Sprintf("%s at the one level (%s)", v, levelList(ls, unit)))
		case k == 0 && len(ls) == out.Levels && out.Levels == 2:
			parts = append(parts, fmt.Sprintf("%s at both levels", v))
		case k == 0 && len(ls) == out.Levels:
			parts = append(parts, fmt.Sprintf("%s at all %d levels", v, out.Levels))
		case k == 0 && len(ls) > 1:
			parts = append(parts, fmt.Sprintf("%s at %d of %d levels", v, len(ls), out.Levels))
		default:
			parts = append(parts, fmt.Sprintf("%s at %s", v, levelList(ls, unit)))
		}
	}
	out.Text = MethodNamed(name).Display + ": " + strings.Join(parts, ", ")
	if len(extrapolated) > 0 {
		out.Text += fmt.Sprintf(" (%s outside the range of the data: extrapolated)", levelList(extrapolated, unit))
	}
	out.Text += "."
	return out
}

func levelList(ls []float64, unit string) string {
	s := make([]string, len(ls))
	for i, v := range ls {
		s[i] = fmt.Sprintf("%g", v)
	}
	out := strings.Join(s, ", ")
	if unit != "" {
		out += " " + unit
	}
	return out
}

// robustness judges every level under each fit in robustFits that ran,
// and again without the flagged outliers (refitted with the same λ; the
// Passing–Bablok verdicts there use its jackknife interval, as no
// bootstrap is rerun).
func robustness(ctx context.Context, st *reduced, em *modelChoice, o *CompareOptions, c *Comparison, positive bool) (*Robustness, error) {
	judged := slices.ContainsFunc(c.DecisionLevels, func(l LevelResult) bool { return l.Allowable != nil })
	if !judged {
		return nil, nil
	}
	r := &Robustness{WithoutOutliers: []string{}}
	for _, name := range robustFits {
		if c.Get(name) != nil {
			r.Fits = append(r.Fits, name)
		}
	}
	// The fits without the outliers.
	var without []*MethodResult
	if out := c.Diagnostics.Outliers; len(out) > 0 && st.Len()-len(out) >= 3 {
		skip := map[int]bool{}
		for _, ol := range out {
			skip[ol.Index] = true
			id := ol.ID
			if id == "" {
				id = fmt.Sprintf("#%d", ol.Index+1)
			}
			r.WithoutOutliers = append(r.WithoutOutliers, id)
		}
		var s eiv.Sample
		for i := range st.X {
			if !skip[st.idx[i]] {
				s.X, s.Y = append(s.X, st.X[i]), append(s.Y, st.Y[i])
			}
		}
		for _, name := range r.Fits {
			m := MethodNamed(name)
			p := fitParams{ctx: ctx, conf: c.Confidence, jackknife: true, jackMax: o.jackMax(), lambda: em.lambdaConst}
			if name == "weighted_deming" {
				p.lambda = em.lambdaRel
			}
			f, err := m.fit(s, p)
			if err != nil {
				if ctx.Err() != nil {
					return nil, ctx.Err()
				}
				continue // a fit the reduced data do not allow has no verdict
			}
			f.Method = m
			without = append(without, f)
		}
	}
	rec := c.Recommendation.Method
	var holdAll, total int
	for _, l := range c.DecisionLevels {
		if l.Allowable == nil {
			continue
		}
		rl := RobustLevel{Level: l.Level, Holds: true}
		for _, f := range l.Fits {
			if slices.Contains(r.Fits, f.Method.Name) && f.Verdict != "" {
				rl.Verdicts = append(rl.Verdicts, RobustVerdict{Method: f.Method.Name, Verdict: f.Verdict})
			}
		}
		for _, f := range without {
			p, ok := f.Predict(l.Level)
			if !ok {
				continue
			}
			if v := verdict(p.Bias.CI, l.Limit); v != "" {
				rl.Verdicts = append(rl.Verdicts, RobustVerdict{Method: f.Method.Name, WithoutOutliers: true, Verdict: v})
			}
		}
		recV := ""
		for _, v := range rl.Verdicts {
			if v.Method == rec && !v.WithoutOutliers {
				recV = v.Verdict
			}
		}
		if recV == "" && len(rl.Verdicts) > 0 {
			recV = rl.Verdicts[0].Verdict
		}
		var differ []string
		for _, v := range rl.Verdicts {
			if v.Verdict != recV {
				rl.Holds = false
				w := MethodNamed(v.Method).Display
				if v.WithoutOutliers {
					w += " without the outliers"
				}
				differ = append(differ, fmt.Sprintf("%s under %s", v.Verdict, w))
			}
		}
		at := levelList([]float64{l.Level}, o.Unit)
		switch {
		case len(rl.Verdicts) == 0:
			rl.Reading = fmt.Sprintf("At %s no fit gives a verdict.", at)
		case rl.Holds:
			rl.Reading = fmt.Sprintf("At %s the verdict %q holds under every fit%s.", at, recV,
				map[bool]string{true: " and without the flagged outliers", false: ""}[len(without) > 0])
			holdAll++
		case len(differ) == len(rl.Verdicts)-1:
			rl.Reading = fmt.Sprintf("At %s the verdict %q rests on one assumption, the %s fit: it is %s.", at, recV,
				MethodNamed(rec).Display, strings.Join(differ, ", "))
		default:
			rl.Reading = fmt.Sprintf("At %s the verdict %q depends on the fit: it is %s.", at, recV, strings.Join(differ, ", "))
		}
		total++
		r.Levels = append(r.Levels, rl)
	}
	switch {
	case total == 0:
		r.Reading = "No fit gives a verdict at any level."
	case holdAll == total:
		r.Reading = "Every verdict holds under every fit the data allow" +
			map[bool]string{true: " and without the flagged outliers.", false: "."}[len(without) > 0]
	default:
		r.Reading = fmt.Sprintf("The verdict holds under every fit at %d of %d levels; where it does not, it rests on the choice of fit%s.",
			holdAll, total, map[bool]string{true: " or on keeping the flagged outliers", false: ""}[len(without) > 0])
	}
	return r, nil
}

// WarnPBJackknifeInterval: Passing–Bablok's verdicts rest on its jackknife
// bias interval, which covers less often than stated (README, "What the
// numbers mean").
const WarnPBJackknifeInterval = "passing_bablok_jackknife_interval"

// pbJackknifeWarning warns once when a Passing–Bablok verdict was judged on
// its jackknife interval.
func pbJackknifeWarning(c *Comparison) {
	for _, l := range c.DecisionLevels {
		for _, f := range l.Fits {
			if f.Method.Name == "passing_bablok" && f.Verdict != "" && !strings.HasPrefix(f.Bias.CI.Method, "bootstrap") {
				c.Warnings = append(c.Warnings, Warning{Method: "passing_bablok", Code: WarnPBJackknifeInterval, Message: "Passing–Bablok's bias intervals at the decision levels are jackknife intervals, which in simulation cover the true bias less often than stated (0.90–0.93 for a stated 0.95 at 40 samples); ask for bootstrap resamples to judge its verdicts on a bootstrap interval"})
				return
			}
		}
	}
}
