package wire

import (
	"fmt"
	"io"
	"slices"
	"strings"
)

// GroupOptions are the options of each group of a file split by group_by,
// read from a small JSON document such as
//
//	{"glucose": {"decision_levels": [3.9, 7], "allowable_bias": {"percent": 5}},
//	 "creatinine": {"decision_levels": [90]}}
//
// Each group's object has the members of a batch's defaults; a member
// given replaces the shared option (a flag) whole for that group. Group
// names are matched exactly.
type GroupOptions struct {
	groups map[string]*groupOptions
	order  []string
}

type groupOptions struct {
	fit   *FitRequest
	cmp   *CompareRequest
	given []string
}

// DecodeGroupOptions reads a group options document strictly: unknown or
// repeated members, a group given twice and lists past their limits are
// refused, each with the pointer /GROUP/MEMBER; at most lim.MaxBatch
// groups.
func DecodeGroupOptions(r io.Reader) (*GroupOptions, error) {
	lim := limitsOf(r)
	b, err := readBody(r)
	if err != nil {
		return nil, err
	}
	g := &GroupOptions{groups: map[string]*groupOptions{}}
	p := &pointParser{b: b, lim: lim}
	p.ws()
	if p.pos >= len(p.b) || p.b[p.pos] != '{' {
		return nil, Invalid("", `the options must be a JSON object of groups, e.g. {"glucose": {"decision_levels": [3.9, 7]}}`)
	}
	p.pos++
	for first := true; ; first = false {
		p.ws()
		if first && p.pos < len(p.b) && p.b[p.pos] == '}' {
			p.pos++
			break
		}
		kb, ok := p.key()
		if !ok {
			return nil, p.syntax("a quoted group name")
		}
		name := string(kb)
		ptr := "/" + escapePointer(Truncate(name))
		if g.groups[name] != nil {
			return nil, Invalid(ptr, fmt.Sprintf("group %q appears twice", Truncate(name)))
		}
		if lim.MaxBatch > 0 && len(g.order) >= lim.MaxBatch {
			return nil, tooMany("", lim.MaxBatch, "groups", KindInvalid)
		}
		if err := nameLength(ptr, name); err != nil {
			return nil, err
		}
		p.ws()
		if p.pos >= len(p.b) || p.b[p.pos] != ':' {
			return nil, p.syntax("':' after the group name")
		}
		p.pos++
		start, err := p.skip(0)
		if err != nil {
			return nil, err
		}
		fit, cmp, given, err := decodeOptions(p.b[start:p.pos], ptr, lim)
		if err != nil {
			return nil, err
		}
		if len(given) == 0 {
			return nil, Invalid(ptr, fmt.Sprintf("group %q has no options", Truncate(name)))
		}
		g.groups[name] = &groupOptions{fit: fit, cmp: cmp, given: given}
		g.order = append(g.order, name)
		p.ws()
		if p.pos < len(p.b) && p.b[p.pos] == ',' {
			p.pos++
			continue
		}
		if p.pos < len(p.b) && p.b[p.pos] == '}' {
			p.pos++
			break
		}
		return nil, p.syntax("',' or '}'")
	}
	p.ws()
	if p.pos != len(p.b) {
		return nil, Invalid("", "the options hold more than one JSON value")
	}
	return g, nil
}

// Check refuses a group the file does not hold (names are its groups, in
// order) and an option the study does not take (kind is DatasetFit or
// DatasetComparison).
func (g *GroupOptions) Check(kind string, names []string) error {
	if g == nil {
		return nil
	}
	other, otherKind := compareDefaultKeys, "a method comparison"
	if kind == DatasetComparison {
		other, otherKind = fitDefaultKeys, "a line fit"
	}
	for _, name := range g.order {
		ptr := "/" + escapePointer(Truncate(name))
		if !slices.Contains(names, name) {
			return Invalid(ptr, fmt.Sprintf("no group %q in the file (groups: %s)", Truncate(name), Truncate(strings.Join(names, ", "))))
		}
		for _, k := range g.groups[name].given {
			if slices.Contains(other, k) {
				return Invalid(ptr+"/"+k, fmt.Sprintf("%q is an option of %s, not of this study", k, otherKind))
			}
		}
	}
	return nil
}

// Fit is base with group's own options in place (base itself when the
// group has none).
func (g *GroupOptions) Fit(group string, base *FitRequest) *FitRequest {
	o := g.of(group)
	if o == nil {
		return base
	}
	r := *base
	for _, k := range o.given {
		switch k {
		case "methods":
			r.Methods = slices.Clone(o.fit.Methods)
		case "at":
			r.At = slices.Clone(o.fit.At)
		case "x_unit":
			r.XUnit = o.fit.XUnit
		case "y_unit":
			r.YUnit = o.fit.YUnit
		case "lambda":
			r.Lambda = clonePtr(o.fit.Lambda)
		case "confidence":
			r.Confidence = clonePtr(o.fit.Confidence)
		case "bootstrap":
			r.Bootstrap = o.fit.Bootstrap.clone()
		}
	}
	return &r
}

// Compare is base with group's own options in place (base itself when
// the group has none).
func (g *GroupOptions) Compare(group string, base *CompareRequest) *CompareRequest {
	o := g.of(group)
	if o == nil {
		return base
	}
	r := *base
	c := o.cmp.clone()
	for _, k := range o.given {
		switch k {
		case "x_name":
			r.XName = c.XName
		case "y_name":
			r.YName = c.YName
		case "unit":
			r.Unit = c.Unit
		case "decision_levels":
			r.DecisionLevels = c.DecisionLevels
		case "allowable_bias":
			r.AllowableBias = c.AllowableBias
		case "error_model":
			r.ErrorModel = c.ErrorModel
		case "lambda":
			r.Lambda = c.Lambda
		case "confidence":
			r.Confidence = c.Confidence
		case "bootstrap":
			r.Bootstrap = c.Bootstrap
		}
	}
	return &r
}

func (g *GroupOptions) of(group string) *groupOptions {
	if g == nil {
		return nil
	}
	return g.groups[group]
}
