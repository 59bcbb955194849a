package wire

import (
	"bytes"
	"math"
	"strconv"
	"unicode/utf8"
)

// The answer of a fit is written field by field without reflection, in
// the bytes encoding/json writes for it (compact, HTML characters
// unescaped): the same field order and names, omitempty and omitzero as
// the struct tags say, numbers formatted as encoding/json formats them.
// TestFitEncoderMatchesEncodingJSON compares the two on random answers;
// a field added to a response type without being added here fails it.

// jsonOut appends JSON to b; notFinite records a number that is not
// finite (the answer is then refused, as encoding/json refuses it).
type jsonOut struct {
	b         []byte
	notFinite bool
	// lvl is the last confidence level written (its bits) and where its
	// digits are in b: a fit's answer writes the same level in every
	// interval (nineteen times in a small fit's), formatted once.
	lvl             uint64
	lvlFrom, lvlEnd int
}

// key starts a member: a comma unless it is the object's first, then the
// quoted name and colon (k is `"name":`).
func (o *jsonOut) key(k string) {
	if o.b[len(o.b)-1] != '{' {
		o.b = append(o.b, ',')
	}
	o.b = append(o.b, k...)
}

// float appends f as encoding/json does: like ES6 number-to-string,
// 'f' format between 1e-6 and 1e21, else 'e' with the exponent unpadded.
func (o *jsonOut) float(f float64) {
	if math.IsInf(f, 0) || math.IsNaN(f) {
		o.notFinite = true
		o.b = append(o.b, '0')
		return
	}
	format := byte('f')
	if abs := math.Abs(f); abs != 0 && (abs < 1e-6 || abs >= 1e21) {
		format = 'e'
	}
	o.b = strconv.AppendFloat(o.b, f, format, -1, 64)
	if format == 'e' {
		if n := len(o.b); n >= 4 && o.b[n-4] == 'e' && o.b[n-3] == '-' && o.b[n-2] == '0' {
			o.b[n-2] = o.b[n-1]
			o.b = o.b[:n-1]
		}
	}
}

// level appends a confidence level as float does, copying the digits of
// the last level written when it is the same number.
func (o *jsonOut) level(f float64) {
	if o.lvlEnd > 0 && math.Float64bits(f) == o.lvl {
		o.b = append(o.b, o.b[o.lvlFrom:o.lvlEnd]...)
		return
	}
	from := len(o.b)
	o.float(f)
	o.lvl, o.lvlFrom, o.lvlEnd = math.Float64bits(f), from, len(o.b)
}

func (o *jsonOut) int(i int) { o.b = strconv.AppendInt(o.b, int64(i), 10) }

func (o *jsonOut) bool(v bool) { o.b = strconv.AppendBool(o.b, v) }

const hexDigits = "0123456789abcdef"

// str appends s quoted as encoding/json does without HTML escaping: '"'
// and '\\' escaped, control characters as short escapes or \u00XX,
// invalid UTF-8 as \ufffd, U+2028 and U+2029 escaped.
func (o *jsonOut) str(s string) {
	b := append(o.b, '"')
	start := 0
	for i := 0; i < len(s); {
		if c := s[i]; c < utf8.RuneSelf {
			if c >= 0x20 && c != '"' && c != '\\' {
				i++
				continue
			}
			b = append(b, s[start:i]...)
			switch c {
			case '\\', '"':
				b = append(b, '\\', c)
			case '\b':
				b = append(b, '\\', 'b')
			case '\f':
				b = append(b, '\\', 'f')
			case '\n':
				b = append(b, '\\', 'n')
			case '\r':
				b = append(b, '\\', 'r')
			case '\t':
				b = append(b, '\\', 't')
			default:
				b = append(b, '\\', 'u', '0', '0', hexDigits[c>>4], hexDigits[c&0xF])
			}
			i++
			start = i
			continue
		}
		r, size := utf8.DecodeRuneInString(s[i:])
		switch {
		case r == utf8.RuneError && size == 1:
			b = append(b, s[start:i]...)
			b = append(b, `\ufffd`...)
		case r == '\u2028' || r == '\u2029':
			b = append(b, s[start:i]...)
			b = append(b, '\\', 'u', '2', '0', '2', hexDigits[r&0xF])
		default:
			i += size
			continue
		}
		i += size
		start = i
	}
	o.b = append(append(b, s[start:]...), '"')
}

// floatAt, intAt, boolAt and strAt append the member k with its value.
func (o *jsonOut) floatAt(k string, f float64) { o.key(k); o.float(f) }
func (o *jsonOut) intAt(k string, i int)       { o.key(k); o.int(i) }
func (o *jsonOut) boolAt(k string, v bool)     { o.key(k); o.bool(v) }
func (o *jsonOut) strAt(k, s string)           { o.key(k); o.str(s) }

// optFloat appends the member k when p is set (omitempty on *float64).
func (o *jsonOut) optFloat(k string, p *float64) {
	if p != nil {
		o.key(k)
		o.float(*p)
	}
}

// optInt appends the member k when p is set (omitempty on *int).
func (o *jsonOut) optInt(k string, p *int) {
	if p != nil {
		o.key(k)
		o.int(*p)
	}
}

// optStr appends the member k when s is not empty (omitempty on string).
func (o *jsonOut) optStr(k, s string) {
	if s != "" {
		o.key(k)
		o.str(s)
	}
}

// fitResponse appends r (FitResponse's tags).
func (o *jsonOut) fitResponse(r *FitResponse) error {
	o.b = append(o.b, `{"n":`...)
	o.int(r.N)
	o.floatAt(`"confidence":`, r.Confidence)
	o.optStr(`"x_unit":`, r.XUnit)
	o.optStr(`"y_unit":`, r.YUnit)
	o.key(`"fits":`)
	o.fits(&r.Fits)
	if len(r.OLSBias) > 0 {
		o.key(`"ols_bias":`)
		o.b = append(o.b, '[')
		for i := range r.OLSBias {
			if i > 0 {
				o.b = append(o.b, ',')
			}
			o.olsBias(&r.OLSBias[i])
		}
		o.b = append(o.b, ']')
	}
	o.key(`"warnings":`)
	o.warnings(r.Warnings)
	if r.Input != nil {
		// How a CSV was read: rare on the hot path, left to encoding/json.
		o.key(`"input":`)
		if err := o.reflected(r.Input); err != nil {
			return err
		}
	}
	o.b = append(o.b, '}')
	return nil
}

// reflected appends v as encoding/json writes it (without its newline).
func (o *jsonOut) reflected(v any) error {
	buf := bytes.NewBuffer(o.b)
	if err := encodeReflect(buf, v); err != nil {
		return err
	}
	o.b = bytes.TrimSuffix(buf.Bytes(), []byte{'\n'})
	return nil
}

func (o *jsonOut) fits(fs *Fits) {
	o.b = append(o.b, '{')
	for _, m := range [...]struct {
		k string
		m *MethodFit
	}{{`"ols":`, fs.OLS}, {`"deming":`, fs.Deming}, {`"weighted_deming":`, fs.WeightedDeming},
		{`"passing_bablok":`, fs.PassingBablok}, {`"york":`, fs.York}} {
		if m.m != nil {
			o.key(m.k)
			o.methodFit(m.m)
		}
	}
	o.b = append(o.b, '}')
}

func (o *jsonOut) methodFit(m *MethodFit) {
	o.b = append(o.b, `{"slope":`...)
	o.param(&m.Slope)
	o.key(`"intercept":`)
	o.param(&m.Intercept)
	o.optFloat(`"cov_slope_intercept":`, m.CovSlopeIntercept)
	o.strAt(`"se_basis":`, m.SEBasis)
	o.optFloat(`"r_squared":`, m.RSquared)
	o.optFloat(`"residual_sd":`, m.ResidualSD)
	o.optFloat(`"lambda":`, m.Lambda)
	o.optStr(`"lambda_source":`, m.LambdaSource)
	o.optFloat(`"chi2":`, m.Chi2)
	o.intAt(`"dof":`, m.DOF)
	o.optFloat(`"mswd":`, m.MSWD)
	o.optFloat(`"p_value":`, m.PValue)
	o.optInt(`"iterations":`, m.Iterations)
	o.boolAt(`"converged":`, m.Converged)
	o.optInt(`"pairwise_slopes":`, m.PairwiseSlopes)
	o.optInt(`"shift":`, m.Shift)
	if c := m.Cusum; c != nil {
		o.key(`"cusum":`)
		o.cusum(c)
	}
	if t := m.KendallTau; t != nil {
		o.key(`"kendall_tau":`)
		o.test(t)
	}
	if j := m.Jackknife; j != nil {
		o.key(`"jackknife":{"slope":`)
		o.seci(&j.Slope)
		o.key(`"intercept":`)
		o.seci(&j.Intercept)
		o.floatAt(`"cov_slope_intercept":`, j.CovSlopeIntercept)
		o.b = append(o.b, '}')
	}
	if bo := m.Bootstrap; bo != nil {
		o.intAt(`"bootstrap":{"resamples":`, bo.Resamples)
		o.intAt(`"failed":`, bo.Failed)
		o.key(`"seed":`)
		o.b = strconv.AppendUint(o.b, bo.Seed, 10)
		o.strAt(`"scheme":`, bo.Scheme)
		o.key(`"slope":`)
		o.bootParam(&bo.Slope)
		o.key(`"intercept":`)
		o.bootParam(&bo.Intercept)
		o.b = append(o.b, '}')
	}
	if len(m.At) > 0 {
		o.key(`"at":`)
		o.b = append(o.b, '[')
		for i := range m.At {
			if i > 0 {
				o.b = append(o.b, ',')
			}
			a := &m.At[i]
			o.b = append(o.b, `{"x":`...)
			o.float(a.X)
			o.boolAt(`"extrapolated":`, a.Extrapolated)
			o.key(`"y":`)
			o.interval(&a.Y)
			if a.Bias != nil {
				o.key(`"bias":`)
				o.interval(a.Bias)
			}
			o.b = append(o.b, '}')
		}
		o.b = append(o.b, ']')
	}
	o.b = append(o.b, '}')
}

func (o *jsonOut) cusum(c *CusumOut) {
	o.b = append(o.b, `{"max_cusum":`...)
	o.float(c.Max)
	o.intAt(`"above":`, c.Above)
	o.intAt(`"below":`, c.Below)
	o.floatAt(`"ks_statistic":`, c.KS)
	o.floatAt(`"p_value":`, c.PValue)
	o.boolAt(`"linear":`, c.Linear)
	o.b = append(o.b, '}')
}

func (o *jsonOut) test(t *TestOut) {
	o.b = append(o.b, `{"statistic":`...)
	o.float(t.Statistic)
	o.floatAt(`"p_value":`, t.PValue)
	o.optStr(`"detail":`, t.Detail)
	o.b = append(o.b, '}')
}

// param appends a Param; its CI is omitzero.
func (o *jsonOut) param(p *Param) {
	o.b = append(o.b, `{"estimate":`...)
	o.float(p.Estimate)
	o.optFloat(`"se":`, p.SE)
	o.optFloat(`"se_scaled":`, p.SEScaled)
	if !p.CI.IsZero() {
		o.key(`"ci":`)
		o.ci(&p.CI)
	}
	o.b = append(o.b, '}')
}

func (o *jsonOut) ci(c *CI) {
	o.b = append(o.b, `{"lower":`...)
	o.float(c.Lower)
	o.floatAt(`"upper":`, c.Upper)
	o.key(`"level":`)
	o.level(c.Level)
	o.strAt(`"method":`, c.Method)
	o.b = append(o.b, '}')
}

// seci appends a SECI; its CI is always written.
func (o *jsonOut) seci(s *SECI) {
	o.b = append(o.b, `{"se":`...)
	o.float(s.SE)
	o.key(`"ci":`)
	o.ci(&s.CI)
	o.b = append(o.b, '}')
}

func (o *jsonOut) bootParam(p *BootParamOut) {
	o.b = append(o.b, '{')
	o.optFloat(`"se":`, p.SE)
	if p.Percentile != nil {
		o.key(`"percentile":`)
		o.bounds(p.Percentile)
	}
	if p.BCa != nil {
		o.key(`"bca":`)
		o.bounds(p.BCa)
	}
	o.b = append(o.b, '}')
}

func (o *jsonOut) bounds(b *Bounds) {
	o.b = append(o.b, `{"lower":`...)
	o.float(b.Lower)
	o.floatAt(`"upper":`, b.Upper)
	o.b = append(o.b, '}')
}

// interval appends an Interval; its CI is omitzero.
func (o *jsonOut) interval(iv *Interval) {
	o.b = append(o.b, `{"estimate":`...)
	o.float(iv.Estimate)
	o.optFloat(`"se":`, iv.SE)
	if !iv.CI.IsZero() {
		o.key(`"ci":`)
		o.ci(&iv.CI)
	}
	if iv.Bootstrap != nil {
		o.key(`"bootstrap":`)
		o.bounds(iv.Bootstrap)
	}
	o.b = append(o.b, '}')
}

func (o *jsonOut) olsBias(ob *OLSBias) {
	o.b = append(o.b, `{"method":`...)
	o.str(ob.Method)
	o.key(`"slope_difference":`)
	o.interval(&ob.SlopeDifference)
	o.key(`"intercept_difference":`)
	o.interval(&ob.InterceptDifference)
	o.key(`"slope_relative_percent":`)
	o.interval(&ob.SlopeRelativePercent)
	o.optFloat(`"reliability":`, ob.Reliability)
	o.optFloat(`"predicted_ols_slope":`, ob.PredictedOLSSlope)
	if len(ob.At) > 0 {
		o.key(`"at":`)
		o.b = append(o.b, '[')
		for i, a := range ob.At {
			if i > 0 {
				o.b = append(o.b, ',')
			}
			o.b = append(o.b, `{"x":`...)
			o.float(a.X)
			o.floatAt(`"ols":`, a.OLS)
			o.floatAt(`"eiv":`, a.EIV)
			o.floatAt(`"difference":`, a.Difference)
			o.b = append(o.b, '}')
		}
		o.b = append(o.b, ']')
	}
	o.strAt(`"summary":`, ob.Summary)
	o.b = append(o.b, '}')
}

// warnings appends ws; nil is null, as encoding/json writes a nil slice.
func (o *jsonOut) warnings(ws []Warning) {
	if ws == nil {
		o.b = append(o.b, "null"...)
		return
	}
	o.b = append(o.b, '[')
	for i := range ws {
		if i > 0 {
			o.b = append(o.b, ',')
		}
		w := &ws[i]
		o.b = append(o.b, '{')
		o.optStr(`"method":`, w.Method)
		o.strAt(`"code":`, w.Code)
		o.strAt(`"message":`, w.Message)
		o.b = append(o.b, '}')
	}
	o.b = append(o.b, ']')
}
