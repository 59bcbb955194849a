package report

import (
	"strings"
)

// flagged is the outlier test's flagged samples as points of plot kind:
// the data and difference plots draw one point per sample (the caller's
// index), the residual plots one per residual (found by the sample's id).
func (ps *plotSet) flagged(kind string) []Flagged {
	out := ps.diag.Outliers.Flagged
	if len(out) == 0 {
		return nil
	}
	var fl Flagged
	for _, o := range out {
		i := -1
		switch kind {
		case "data", "difference":
			if o.Index >= 0 && o.Index < len(ps.x) {
				i = o.Index
			}
		case "residuals", "run-order":
			for j, id := range ps.resid.IDs {
				if o.ID != "" && id == o.ID {
					i = j
					break
				}
			}
			if i < 0 && o.ID == "" && len(ps.resid.Residual) == len(ps.x) && o.Index >= 0 && o.Index < len(ps.x) {
				i = o.Index
			}
		}
		if i >= 0 {
			fl.Index, fl.IDs = append(fl.Index, i), append(fl.IDs, o.ID)
		}
	}
	if len(fl.Index) == 0 {
		return nil
	}
	return []Flagged{fl}
}

// captionFor completes the caption c of plot kind with what the plot
// draws: for the data plot, what its error bars are (or that there are
// none) and which lines it shows; for every plot that marks them, the
// flagged outliers by name.
func (ps *plotSet) captionFor(kind, c string) string {
	if kind == "data" {
		rest := ""
		if i := strings.Index(c, ". "); i >= 0 {
			rest = c[i+1:]
		}
		var b strings.Builder
		b.WriteString("The samples")
		switch {
		case Binned(len(ps.x)):
		case ps.sx != nil && ps.sy != nil:
			b.WriteString(" with bars of ±1 stated standard deviation (σx across, σy up and down)")
		case ps.sx != nil:
			b.WriteString(" with bars of ±1 stated standard deviation of x (σx)")
		case ps.sy != nil:
			b.WriteString(" with bars of ±1 stated standard deviation of y (σy)")
		default:
			b.WriteString(" (no standard deviations were given, so no error bars are drawn)")
		}
		b.WriteString(", the " + displayName(ps.fitName) + " line with its pointwise confidence band")
		if ps.ols != nil && ps.fitName != "ols" {
			b.WriteString(", the OLS line (dashed)")
		}
		if ps.axes.SameScale() {
			b.WriteString(" and the identity line y = x (dotted).")
		} else {
			b.WriteString("; x and y are in different units, so there is no identity line.")
		}
		c = b.String() + rest
	}
	if fl := ps.flagged(kind); len(fl) > 0 {
		c += " Black diamonds mark the samples flagged by the outlier test, " + ps.diag.Outliers.Method + ": " + fl[0].names() + "; they are kept in the fits."
	}
	return c
}
