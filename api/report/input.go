package report

import (
	"fmt"
	"strings"

	"eivfit/api/wire"
)

// How an export was read: the columns and units taken, the columns left
// unread and every row left out with its reason, in the text and the
// report alike, so that nothing dropped goes unseen.

// inputLines are the sentences about how the export was read.
func inputLines(in *wire.InputOut) []string {
	if in == nil {
		return nil
	}
	var out []string
	if in.Group != "" {
		out = append(out, "Group: "+in.Group+".")
	}
	if len(in.Columns) > 0 {
		var cs []string
		for _, c := range in.Columns {
			s := c.Role + " ← " + c.Header
			if c.Unit != "" && !strings.Contains(c.Header, c.Unit) {
				s += " [" + c.Unit + "]"
			}
			cs = append(cs, s)
		}
		out = append(out, "Columns read: "+strings.Join(cs, "; ")+".")
	}
	if len(in.IgnoredColumns) > 0 {
		out = append(out, fmt.Sprintf("Columns not read (extra_columns=ignore): %s.", strings.Join(in.IgnoredColumns, ", ")))
	}
	if r := in.Replicates; r != nil {
		out = append(out, fmt.Sprintf("Replicates: %d rows gathered into %d samples by id; x: %s; y: %s.", r.Rows, r.Samples, countText(r.X), countText(r.Y)))
	}
	if len(in.SkippedRows) > 0 {
		rows := "rows"
		if len(in.SkippedRows) == 1 {
			rows = "row"
		}
		out = append(out, fmt.Sprintf("%d %s left out (missing=skip), listed below.", len(in.SkippedRows), rows))
	}
	return out
}

func countText(cs []wire.ReplicateCount) string {
	var parts []string
	for _, c := range cs {
		parts = append(parts, fmt.Sprintf("%d samples with %d", c.Samples, c.Replicates))
	}
	return strings.Join(parts, ", ")
}

// writeInputText prints how the export was read, each skipped row on a
// line of its own.
func writeInputText(b *strings.Builder, in *wire.InputOut) {
	lines := inputLines(in)
	if len(lines) == 0 {
		return
	}
	b.WriteString("\nInput:\n")
	for _, l := range lines {
		fmt.Fprintf(b, "  %s\n", l)
	}
	for _, r := range in.SkippedRows {
		fmt.Fprintf(b, "  skipped row %d, column %s (%q): %s\n", r.Row, r.Column, r.Value, r.Reason)
	}
}

// inputSection is the report's section on how the export was read.
func inputSection(in *wire.InputOut) (Section, bool) {
	lines := inputLines(in)
	if len(lines) == 0 {
		return Section{}, false
	}
	s := Section{Heading: "How the file was read", Text: lines}
	if t, ok := skippedTable(in); ok {
		s.Tables = append(s.Tables, t)
	}
	return s, true
}

// skippedTable lists the rows left out with their reasons.
func skippedTable(in *wire.InputOut) (Table, bool) {
	if in == nil || len(in.SkippedRows) == 0 {
		return Table{}, false
	}
	t := Table{Caption: "Rows left out", Header: []string{"row", "column", "value", "reason"}, Numeric: []int{0}}
	for _, r := range in.SkippedRows {
		t.Rows = append(t.Rows, Row{Class: "bad", Cells: []string{fmt.Sprint(r.Row), r.Column, r.Value, r.Reason}})
	}
	return t, true
}
