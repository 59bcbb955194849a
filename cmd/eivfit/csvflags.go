package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"net/url"
	"os"
	"strings"

	"eivfit/api/wire"
)

// csvFlags are the flags that read instruments' and LIMS's exports, the
// query parameters of wire.CSVQueryParameters spelt with '-'.
type csvFlags struct {
	values       map[string]*string
	unitsRow     *bool
	groupOptions *string
}

func addCSVFlags(fs *flag.FlagSet) *csvFlags {
	f := &csvFlags{values: map[string]*string{}}
	usage := map[string]string{
		"columns":       "map headers to roles: x:Reference,y:Candidate,id:SampleID,sx:u_ref,order:Seq",
		"extra_columns": "refuse (default) or ignore columns eivfit does not read (listed in input.ignored_columns)",
		"delimiter":     "comma (default), semicolon or tab",
		"decimal":       "decimal mark of the file: point (default) or comma (option values always use a point)",
		"missing":       "refuse (default) or skip rows with blank, NA, n.d. or censored (<0.5, >100) cells (listed in input.skipped_rows)",
		"x_method":      "long format id,method,value: the name of the comparative method in the method column",
		"y_method":      "long format id,method,value: the name of the candidate method in the method column",
		"group_by":      "split the file into one study per value of this column (e.g. analyte); one block per group",
	}
	for _, name := range wire.CSVQueryParameters {
		if name == "units_row" {
			continue
		}
		f.values[name] = fs.String(strings.ReplaceAll(name, "_", "-"), "", usage[name])
	}
	f.unitsRow = fs.Bool("units-row", false, "read the row after the header as the columns' units")
	f.groupOptions = fs.String("group-options", "", `with --group-by: a JSON file of each group's own options, e.g. {"glucose": {"decision_levels": [3.9, 7]}} (the members of a batch's defaults; each replaces its flag for that group)`)
	return f
}

// groups reads --group-options for a file split by o.GroupBy into names
// (nil without the flag) and checks it against the groups and the study
// (kind: wire.DatasetFit or wire.DatasetComparison).
func (f *csvFlags) groups(o *wire.CSVOptions, kind string, names []string) (*wire.GroupOptions, error) {
	if *f.groupOptions == "" {
		return nil, nil
	}
	fail := func(err error) error {
		if p, ok := err.(*wire.Problem); ok && len(p.Errors) > 0 {
			return fmt.Errorf("--group-options %s: %s: %s", *f.groupOptions, p.Errors[0].Pointer, p.Errors[0].Detail)
		}
		return fmt.Errorf("--group-options %s: %v", *f.groupOptions, err)
	}
	file, err := os.Open(*f.groupOptions)
	if err != nil {
		return nil, fmt.Errorf("--group-options: %v", err)
	}
	defer file.Close()
	g, err := wire.DecodeGroupOptions(io.LimitReader(file, 1<<20))
	if err != nil {
		return nil, fail(err)
	}
	if err := g.Check(kind, names); err != nil {
		return nil, fail(err)
	}
	return g, nil
}

// checkGroupFlags refuses --group-options without --group-by, and --save
// with --group-by: the store keeps one study per request.
func (f *csvFlags) checkGroupFlags(save bool, o *wire.CSVOptions) error {
	if *f.groupOptions != "" && o.GroupBy == "" {
		return errors.New("--group-options gives options per group: add --group-by naming the column that splits the file")
	}
	if save && o.GroupBy != "" {
		return errors.New("--save with --group-by: a file split into groups is not saved as studies (the store keeps one study per request); save each group's rows on their own")
	}
	return nil
}

// options reads the flags as the service reads the query parameters.
func (f *csvFlags) options() (*wire.CSVOptions, error) {
	q := url.Values{}
	for name, v := range f.values {
		if *v != "" {
			q.Set(name, *v)
		}
	}
	if *f.unitsRow {
		q.Set("units_row", "true")
	}
	return wire.CSVOptionsFromFlags(q)
}

// writeGroups prints the answers of a file split by --group-by: the batch
// JSON, or one text block per group.
func writeGroups(stdout, stderr io.Writer, name, format string, pretty bool, resp *wire.BatchResponse, text func(io.Writer, *wire.BatchResult) error) error {
	if format != "text" {
		return writeOutput(stdout, stderr, name, &wire.Source{Form: wire.FormFlags}, format, pretty, resp, nil)
	}
	for i := range resp.Results {
		r := &resp.Results[i]
		if _, err := fmt.Fprintf(stdout, "==== %s ====\n", r.Name); err != nil {
			return err
		}
		if r.Problem != nil {
			fmt.Fprintf(stdout, "%s\n", r.Problem.Title)
			for _, e := range r.Problem.Errors {
				fmt.Fprintf(stdout, "  %s: %s\n", e.Pointer, e.Detail)
			}
			if len(r.Problem.Errors) == 0 {
				fmt.Fprintf(stdout, "  %s\n", r.Problem.Detail)
			}
		} else if err := text(stdout, r); err != nil {
			return err
		}
		fmt.Fprintln(stdout)
	}
	return nil
}

// groupResult is one group's answer or problem.
func groupResult(name string, answer any, err error, src *wire.Source) wire.BatchResult {
	r := wire.BatchResult{Name: name}
	if err != nil {
		if src != nil {
			err = src.Problem(err)
		}
		p, ok := err.(*wire.Problem)
		if !ok {
			p = wire.NewProblem(wire.KindUnfittable, err.Error())
		}
		r.Status, r.Problem = p.Status, p
		return r
	}
	if _, err := wire.Marshal(answer); err != nil {
		return groupResult(name, nil, err, src)
	}
	r.Status = 200
	switch a := answer.(type) {
	case *wire.FitResponse:
		r.Fit = a
	case *wire.CompareResponse:
		r.Comparison = a
	}
	return r
}

// tally counts the results.
func tally(resp *wire.BatchResponse) {
	for _, r := range resp.Results {
		if r.Status == 200 {
			resp.OK++
		} else {
			resp.Failed++
		}
	}
}
