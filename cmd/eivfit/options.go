package main

import (
	"flag"
	"fmt"
	"strings"

	"eivfit/api/wire"
)

// strictFlags gives a command's flags the query parameters' rules, so that
// no flag is silently dropped: a flag that takes one value may be given
// once (flag would keep the last), a list flag given again appends, and a
// list value must be a comma list (no ';'; with --decimal comma, no
// number split at its decimal comma). Call check after parsing.
type strictFlags struct {
	fs      *flag.FlagSet
	lists   map[string]bool
	numeric map[string]bool
	given   map[string]int
}

// newStrictFlags wraps every flag already defined on fs except boolean
// ones and --tag; lists and numeric name the list flags (numeric: lists of numbers).
func newStrictFlags(fs *flag.FlagSet, lists, numeric []string) *strictFlags {
	s := &strictFlags{fs: fs, lists: map[string]bool{}, numeric: map[string]bool{}, given: map[string]int{}}
	for _, n := range lists {
		s.lists[n] = true
	}
	for _, n := range numeric {
		s.lists[n], s.numeric[n] = true, true
	}
	fs.VisitAll(func(f *flag.Flag) {
		if b, ok := f.Value.(interface{ IsBoolFlag() bool }); ok && b.IsBoolFlag() {
			return
		}
		if _, ok := f.Value.(*tagList); ok {
			return // repeatable by itself: each --tag is one tag
		}
		f.Value = &strictValue{Value: f.Value, name: f.Name, s: s}
	})
	return s
}

// strictValue counts a flag's values; a list's values are joined with
// commas.
type strictValue struct {
	flag.Value
	name string
	s    *strictFlags
	vals []string
}

func (v *strictValue) String() string {
	if v == nil || v.Value == nil {
		return ""
	}
	return v.Value.String()
}

func (v *strictValue) Set(x string) error {
	v.vals = append(v.vals, x)
	v.s.given[v.name]++
	if len(v.vals) > 1 && !v.s.lists[v.name] {
		return nil // refused by check, naming the flag
	}
	return v.Value.Set(strings.Join(v.vals, ","))
}

// check refuses a repeated single-valued flag and a list value that is not
// a comma list, naming the flag (--at).
func (s *strictFlags) check() error {
	decimalComma := false
	if f := s.fs.Lookup("decimal"); f != nil && f.Value.String() == "comma" {
		decimalComma = true
	}
	var err error
	s.fs.Visit(func(f *flag.Flag) {
		v, ok := f.Value.(*strictValue)
		if !ok || err != nil {
			return
		}
		if !s.lists[f.Name] {
			if len(v.vals) > 1 {
				err = fmt.Errorf("--%s: %s", f.Name, wire.Repeated(len(v.vals)))
			}
			return
		}
		for _, x := range v.vals {
			if _, p := wire.SplitOption(x, s.numeric[f.Name] && decimalComma); p != "" {
				err = fmt.Errorf("--%s: %s", f.Name, p)
				return
			}
		}
	})
	return err
}
