package wire

import (
	"fmt"
	"net/url"
	"regexp"
	"slices"
	"sort"
	"strconv"
	"strings"
)

// MaxQueryParams bounds the parameters of one query string; a query with
// more is refused whole (net/url would drop it silently).
const MaxQueryParams = 10_000

// ParseQuery reads a raw query string strictly: NAME=VALUE pairs separated
// by '&', '+' for a space and %XX escapes. Where net/url drops a pair it
// cannot read, ParseQuery refuses the query naming the problem: a bad
// %-escape, ';' used to separate parameters, more than MaxQueryParams
// parameters. A ';' inside a value is kept, for the parameter's reader to
// judge (a list refuses it: SplitOption). Empty pairs ("a=1&&b=2") are
// skipped; a NAME without '=' has the empty value.
func ParseQuery(raw string) (url.Values, error) {
	q := url.Values{}
	n := 0
	for pair := range strings.SplitSeq(raw, "&") {
		if pair == "" {
			continue
		}
		if n++; n > MaxQueryParams {
			return nil, Invalid("query", fmt.Sprintf("more than %d query parameters", MaxQueryParams))
		}
		k, v, _ := strings.Cut(pair, "=")
		key, err := url.QueryUnescape(k)
		if err != nil {
			return nil, Invalid("query", fmt.Sprintf("the parameter name %q has a bad %%-escape (write %%25 for a literal %%)", Truncate(k)))
		}
		if semicolonSeparated.MatchString(v) || strings.Contains(k, ";") {
			return nil, Invalid("query parameter "+Truncate(key), "parameters are separated by '&', not ';'")
		}
		val, err := url.QueryUnescape(v)
		if err != nil {
			return nil, Invalid("query parameter "+Truncate(key), fmt.Sprintf("the value %q has a bad %%-escape (write %%25 for a literal %%)", Truncate(v)))
		}
		q[key] = append(q[key], val)
	}
	return q, nil
}

// semicolonSeparated matches a raw value in which ';' begins another
// NAME=VALUE pair.
var semicolonSeparated = regexp.MustCompile(`;[^;=]*=`)

// paramSpec is what the options of one request take from a query: each
// parameter given at most once, or a comma list (repeats append). Numeric
// lists are checked against decimal=comma.
type paramSpec struct {
	single  []string
	lists   []string
	numeric []string // lists of numbers (also in lists)
}

// check refuses an unknown parameter, a single-valued parameter given more
// than once, and a list value that is not a comma list (see SplitOption).
func (ps paramSpec) check(q url.Values) error {
	keys := make([]string, 0, len(q))
	for k := range q {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	decimalComma := len(q["decimal"]) > 0 && q["decimal"][0] == "comma"
	for _, k := range keys {
		ptr := "query parameter " + Truncate(k)
		switch {
		case slices.Contains(ps.lists, k):
			for _, v := range q[k] {
				if _, err := SplitOption(v, slices.Contains(ps.numeric, k) && decimalComma); err != "" {
					return Invalid(ptr, err)
				}
			}
		case slices.Contains(ps.single, k):
			if len(q[k]) > 1 {
				return Invalid(ptr, Repeated(len(q[k])))
			}
		default:
			return Invalid(ptr, fmt.Sprintf("unknown query parameter %q", Truncate(k)))
		}
	}
	return nil
}

// Repeated is the detail for an option given n > 1 times that takes one
// value.
func Repeated(n int) string {
	return fmt.Sprintf("given %d times: it takes one value; give it once", n)
}

// SplitOption splits one value of a list option at its commas (blanks
// dropped). problem is non-empty when the value is not a comma list: a ';'
// in it, or, when the file's decimal mark is a comma (decimalComma), a
// number that looks split at its decimal comma ("3,9": an integer followed
// by bare digits), since option values always use a point.
func SplitOption(v string, decimalComma bool) (fields []string, problem string) {
	if strings.Contains(v, ";") {
		return nil, fmt.Sprintf("%q: separate values with commas, not ';'", Truncate(v))
	}
	fields = SplitList(v)
	if decimalComma {
		for i := 1; i < len(fields); i++ {
			if integer.MatchString(fields[i-1]) && digits.MatchString(fields[i]) {
				return nil, fmt.Sprintf("%q may be the number %s.%s written with a decimal comma: decimal=comma is the file's decimal mark, and option values always use a point (%s.%s); write whole-number values with a point (%s.0,%s) or repeat the parameter",
					Truncate(v), fields[i-1], fields[i], fields[i-1], fields[i], fields[i-1], fields[i])
			}
		}
	}
	return fields, ""
}

var (
	integer = regexp.MustCompile(`^-?[0-9]+$`)
	digits  = regexp.MustCompile(`^[0-9]+$`)
)

// queryList is every entry of a list parameter: each value split at its
// commas, in order (a repeated parameter appends). The values were checked
// by paramSpec.check.
func queryList(q url.Values, name string) []string {
	var out []string
	for _, v := range q[name] {
		out = append(out, SplitList(v)...)
	}
	return out
}

// QueryInt reads an integer option value written as plain decimal digits,
// optionally after a '-': the same rule as numbers everywhere else in a
// request, so "+5", " 5", "5.0", "0x5" and "1_000" are refused (strconv.Atoi
// would take "+5"). what names the option in the problem.
func QueryInt(what, s string) (int, error) {
	if !integer.MatchString(s) || len(strings.TrimPrefix(s, "-")) > 18 {
		return 0, Invalid(what, fmt.Sprintf("%q is not an integer (plain digits, at most 18)", Truncate(s)))
	}
	return strconv.Atoi(s) // 18 digits cannot overflow
}
