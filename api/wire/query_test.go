package wire

import (
	"net/url"
	"reflect"
	"strings"
	"testing"
)

func TestParseQuery(t *testing.T) {
	for _, c := range []struct {
		name, raw string
		want      url.Values
		problem   string // a substring of the detail; "" for no error
	}{
		{"plain", "at=7,11.1&seed=1", url.Values{"at": {"7,11.1"}, "seed": {"1"}}, ""},
		{"repeat kept in order", "at=7&at=11", url.Values{"at": {"7", "11"}}, ""},
		{"escapes and plus", "unit=mg%2FdL&x_name=old+analyser", url.Values{"unit": {"mg/dL"}, "x_name": {"old analyser"}}, ""},
		{"empty pairs skipped", "a=1&&b", url.Values{"a": {"1"}, "b": {""}}, ""},
		{"semicolon inside a value kept", "at=7;11", url.Values{"at": {"7;11"}}, ""},
		{"escaped semicolon kept", "unit=a%3Bb=c", url.Values{"unit": {"a;b=c"}}, ""},
		{"semicolon separator", "at=7;seed=1", nil, "separated by '&', not ';'"},
		{"semicolon in a name", "a;b=1", nil, "separated by '&', not ';'"},
		{"bad escape in a value", "at=7%zz", nil, "bad %-escape"},
		{"truncated escape", "at=7%2", nil, "bad %-escape"},
		{"bad escape in a name", "a%g=1", nil, "bad %-escape"},
		{"at the limit", strings.Repeat("a=1&", MaxQueryParams), url.Values{"a": slicesOf("1", MaxQueryParams)}, ""},
		{"over the limit", strings.Repeat("a=1&", MaxQueryParams) + "b=2", nil, "more than 10000"},
	} {
		t.Run(c.name, func(t *testing.T) {
			q, err := ParseQuery(c.raw)
			if c.problem != "" {
				if err == nil || !strings.Contains(err.(*Problem).Detail, c.problem) {
					t.Fatalf("err %v, want %q", err, c.problem)
				}
				return
			}
			if err != nil || !reflect.DeepEqual(q, c.want) {
				t.Fatalf("got %v %v, want %v", wireTrunc(q), err, wireTrunc(c.want))
			}
		})
	}
}

func slicesOf(v string, n int) []string {
	out := make([]string, n)
	for i := range out {
		out[i] = v
	}
	return out
}

func wireTrunc(q url.Values) string { return Truncate(q.Encode()) }

// The decimal=comma rule: option values use a point; a number list that
// looks like a number split at its decimal comma is refused only when the
// file's decimal mark is a comma.
func TestSplitOptionDecimalComma(t *testing.T) {
	spec := paramSpec{single: []string{"decimal", "seed"}, lists: []string{"decision_levels", "exclude"}, numeric: []string{"decision_levels"}}
	for _, c := range []struct {
		name, raw, problem string
	}{
		{"point decimal mark", "decision_levels=3,9", ""},
		{"comma file, split number", "decimal=comma&decision_levels=3,9", "may be the number 3.9 written with a decimal comma"},
		{"comma file, negative", "decimal=comma&decision_levels=-3,9", "may be the number -3.9"},
		{"comma file, points", "decimal=comma&decision_levels=3.9,7.0", ""},
		{"comma file, whole numbers with a point", "decimal=comma&decision_levels=3.0,9", ""},
		{"comma file, repeated instead", "decimal=comma&decision_levels=3&decision_levels=9", ""},
		{"comma file, ids are not numbers", "decimal=comma&exclude=3,9", ""},
		{"semicolon", "decision_levels=3.9;7", "separate values with commas"},
		{"semicolon in ids", "exclude=a;b", "separate values with commas"},
		{"repeated single", "seed=1&seed=2", "given 2 times"},
		{"unknown", "sead=1", "unknown query parameter"},
	} {
		t.Run(c.name, func(t *testing.T) {
			q, err := ParseQuery(c.raw)
			if err == nil {
				err = spec.check(q)
			}
			switch {
			case c.problem == "" && err != nil:
				t.Fatalf("refused: %v", err)
			case c.problem != "" && (err == nil || !strings.Contains(err.(*Problem).Detail, c.problem)):
				t.Fatalf("err %v, want %q", err, c.problem)
			}
		})
	}
}

// Integer options take plain digits only, like every number in a request
// (strconv.Atoi alone took "+5"; common practice for strict APIs).
func TestQueryInt(t *testing.T) {
	for _, c := range []struct {
		in   string
		want int
		ok   bool
	}{
		{"5", 5, true},
		{"-3", -3, true},
		{"0", 0, true},
		{"999999999999999999", 999999999999999999, true},
		{"+5", 0, false},
		{" 5", 0, false},
		{"5.0", 0, false},
		{"0x5", 0, false},
		{"1_000", 0, false},
		{"", 0, false},
		{"-", 0, false},
		{"9999999999999999999", 0, false},
	} {
		got, err := QueryInt("query parameter resamples", c.in)
		if (err == nil) != c.ok || got != c.want {
			t.Errorf("%q: %d, %v; want %d, ok %v", c.in, got, err, c.want, c.ok)
		}
		if err != nil && !strings.Contains(err.Error(), "resamples") {
			t.Errorf("%q: the problem does not name the option: %v", c.in, err)
		}
	}
}
