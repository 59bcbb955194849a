package wire

import (
	"errors"
	"fmt"
	"slices"
	"strings"

	"eivfit/eiv/study"
)

// Form is how a request came.
type Form int

const (
	// FormJSON is a JSON body: places are RFC 6901 JSON pointers.
	FormJSON Form = iota
	// FormCSV is a CSV body with the options in the query string: places
	// are "row N, column C" and "query parameter NAME".
	FormCSV
	// FormFlags is a CSV file with the options as command-line flags:
	// places are "row N, column C" and "--flag".
	FormFlags
)

// Source locates a study.Error in the request it came from.
type Source struct {
	Form Form
	// Root is the JSON pointer of the data ("/points" or "/samples").
	Root string
	// Rows holds the CSV line of each data point.
	Rows []int
	// firstRow, when Rows is nil, is the line of the first of points data
	// points on consecutive lines.
	firstRow, points int
	// Methods are the methods the request listed (nil: the defaults).
	Methods []string
	// paths, when set, locates errors whose fields are slash paths into
	// the request (a calibration's; see locatePath).
	paths *calRows
}

// Problem turns a study error into a problem naming the offending place
// in the client's terms; other errors pass unchanged.
func (s *Source) Problem(err error) error {
	var list study.ErrorList
	var e *study.Error
	switch {
	case errors.As(err, &list):
		var fes []FieldError
		for _, e := range list {
			fes = append(fes, FieldError{Pointer: s.Locate(e), Detail: e.Error()})
		}
		return NewProblem(kindOf(list[0].Kind), list.Error(), fes...)
	case errors.As(err, &e):
		return NewProblem(kindOf(e.Kind), e.Error(), FieldError{Pointer: s.Locate(e), Detail: e.Error()})
	}
	return err
}

func kindOf(k study.Kind) Kind {
	switch k {
	case study.Unfittable:
		return KindUnfittable
	case study.TooLarge:
		return KindTooLarge
	}
	return KindInvalid
}

// Locate names the place of e: a data point's cell, the data as a whole,
// a method, or an option.
func (s *Source) Locate(e *study.Error) string {
	if s.paths != nil {
		return s.locatePath(e)
	}
	switch e.Field {
	case study.FieldData:
		return s.point(-1, "")
	case study.FieldMethod:
		switch {
		case s.Form != FormJSON:
			return s.option("methods", -1)
		case len(s.Methods) > 0:
			return s.option("methods", slices.Index(s.Methods, e.Method))
		}
		return s.Root
	case "x", "y", "sx", "sy", "r", "id", "order", "runs", "x_runs", "y_runs":
		return s.point(e.Index, e.Field)
	}
	return s.option(e.Field, e.Index)
}

// point names point i's field: for CSV input by its line ("row N, column
// C"; "body" for the whole input), else by JSON pointer under Root.
func (s *Source) point(i int, field string) string {
	if s.Form == FormJSON {
		switch {
		case i < 0:
			return s.Root
		case field == "":
			return fmt.Sprintf("%s/%d", s.Root, i)
		}
		return fmt.Sprintf("%s/%d/%s", s.Root, i, field)
	}
	var row int
	switch {
	case i >= 0 && i < len(s.Rows):
		row = s.Rows[i]
	case s.Rows == nil && s.firstRow > 0 && i >= 0 && i < s.points:
		row = s.firstRow + i
	default:
		return "body"
	}
	if field == "" {
		return fmt.Sprintf("row %d", row)
	}
	return fmt.Sprintf("row %d, column %s", row, field)
}

// option names an option (a slash path such as bootstrap/resamples) and,
// for a list, its entry index.
func (s *Source) option(field string, index int) string {
	if s.Form == FormJSON {
		if index >= 0 {
			return fmt.Sprintf("/%s/%d", field, index)
		}
		return "/" + field
	}
	name := field
	switch {
	case field == "allowable_bias", field == "allowable_bias/absolute":
		name = "allowable_absolute"
	case field == "allowable_bias/percent":
		name = "allowable_percent"
	default:
		name = field[strings.LastIndexByte(field, '/')+1:]
	}
	if s.Form == FormFlags {
		return "--" + strings.ReplaceAll(name, "_", "-")
	}
	return "query parameter " + name
}
