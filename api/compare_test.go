package api

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"strings"
	"testing"

	"eivfit/api/answertest"
	"eivfit/api/wire"
)

func decodeCompare(t *testing.T, body string) *wire.CompareResponse {
	t.Helper()
	req, err := wire.DecodeCompareJSON(strings.NewReader(body))
	if err != nil {
		t.Fatal(err)
	}
	resp, err := runCompare(context.Background(), req, defaultSettings)
	if err != nil {
		t.Fatal(err)
	}
	var b bytes.Buffer
	if err := wire.WriteJSON(&b, resp); err != nil {
		t.Fatal(err)
	}
	answertest.Check(t, b.Bytes())
	return resp
}

// The peak-flow study of Bland & Altman (1986), Table 1
// (testdata/ref/bland-altman-1986-pefr.csv), first readings, through the
// whole comparison: differences are y − x, so y = meter A and x = meter B
// give the paper's A − B: mean −2.1, SD 38.8 (published), −2.11764705882 and
// 38.76512987360738 unrounded (the file's and numpy's re-computations).
func TestComparePEFR(t *testing.T) {
	b, err := os.ReadFile("../testdata/ref/bland-altman-1986-pefr.csv")
	if err != nil {
		t.Fatal(err)
	}
	var samples []string
	var dup []string
	for _, line := range strings.Split(string(b), "\n") {
		if line == "" || line[0] == '#' || strings.HasPrefix(line, "subject") {
			continue
		}
		f := strings.Split(strings.TrimSpace(line), ",")
		samples = append(samples, fmt.Sprintf(`{"id":"P%s","x":%s,"y":%s}`, f[0], f[3], f[1]))
		dup = append(dup, fmt.Sprintf(`{"id":"P%s","x":[%s,%s],"y":[%s,%s]}`, f[0], f[3], f[4], f[1], f[2]))
	}
	resp := decodeCompare(t, `{"samples":[`+strings.Join(samples, ",")+`],"unit":"l/min","decision_levels":[400],"allowable_bias":{"absolute":20}}`)
	a := resp.Agreement
	if math.Abs(a.MeanDifference.Estimate-(-2.11764705882)) > 1e-10 || math.Abs(a.SDDifference-38.76512987360738) > 1e-10 {
		t.Errorf("mean %v SD %v", a.MeanDifference.Estimate, a.SDDifference)
	}
	if math.Round(a.MeanDifference.Estimate*10)/10 != -2.1 || math.Round(a.SDDifference*10)/10 != 38.8 {
		t.Error("published rounding not reproduced")
	}
	// 1.96 SD limits, the file's re-computation: −78.0973 / 73.8620.
	if math.Abs(a.LimitsOfAgreement.Lower.Estimate-(-78.0973)) > 5e-5 || math.Abs(a.LimitsOfAgreement.Upper.Estimate-73.8620) > 5e-5 {
		t.Errorf("limits %v %v", a.LimitsOfAgreement.Lower.Estimate, a.LimitsOfAgreement.Upper.Estimate)
	}
	if resp.Caution == "" || !strings.Contains(resp.SignConvention, "y − x") {
		t.Error("caution or sign convention missing")
	}
	if resp.ErrorModel.Source != "assumed" || resp.ErrorModel.LambdaSource != "assumed" {
		t.Errorf("error model %+v", resp.ErrorModel)
	}
	if resp.Fits.PassingBablok == nil || resp.Fits.Deming == nil || resp.Fits.OLS == nil || resp.Fits.York != nil {
		t.Error("fits missing")
	}
	if v := resp.DecisionLevels[0].Fits["deming"].Verdict; v == "" {
		t.Error("no verdict")
	}
	// With both readings, the repeatability of each meter comes from the
	// replicates: √(Σd²/(2n)) from the file's mean and SD of first − second
	// readings (A: 4.9412, 21.7240; B: −2.8824, 28.8723).
	resp = decodeCompare(t, `{"samples":[`+strings.Join(dup, ",")+`]}`)
	em := resp.ErrorModel
	sr := func(m, s float64) float64 { return math.Sqrt((16*s*s + 17*m*m) / 34) }
	if em.Source != "replicates" || math.Abs(em.Y.SD/sr(4.9412, 21.7240)-1) > 1e-4 || math.Abs(em.X.SD/sr(-2.8824, 28.8723)-1) > 1e-4 {
		t.Errorf("repeatability x %v y %v", em.X.SD, em.Y.SD)
	}
	// λ = s²_y/s²_x for duplicates on both methods.
	if math.Abs(em.Lambda-em.Y.SD*em.Y.SD/(em.X.SD*em.X.SD)) > 1e-12 || em.LambdaSource != "replicates" {
		t.Errorf("lambda %v", em.Lambda)
	}
}

// A synthetic study with known constant and proportional bias (y = 0.4 +
// 1.06·x, duplicates, constant error SD 0.15 on both) recovers both within
// their intervals, and the bias at the decision levels within theirs. The
// seed is fixed, so the assertion is deterministic; 95 % intervals miss the
// truth 1 time in 20, and this seed is not chosen to make them hit (a
// second check over 40 seeds counts misses against the binomial bound).
func TestCompareRecoversKnownBias(t *testing.T) {
	misses, trials := 0, 0
	for seed := uint64(1); seed <= 40; seed++ {
		body := syntheticStudy(seed, 80, 0.4, 1.06, func(float64) float64 { return 0.15 }, nil)
		resp := decodeCompare(t, body)
		if resp.ErrorModel.Model != "constant" && seed == 1 {
			t.Errorf("error model %s, want constant", resp.ErrorModel.Model)
		}
		d := resp.Fits.Deming
		for _, c := range []struct {
			ci   wire.CI
			true float64
		}{{d.Slope.CI, 1.06}, {d.Intercept.CI, 0.4}, {resp.DecisionLevels[0].Fits["deming"].Bias.CI, 0.4 + 0.06*5}} {
			trials++
			if c.true < c.ci.Lower || c.true > c.ci.Upper {
				misses++
			}
		}
	}
	// 120 intervals at 95 %: mean 6 misses, P(more than 14) < 0.002 (binomial).
	if misses > 14 {
		t.Errorf("%d of %d intervals missed the truth", misses, trials)
	}
	// Proportional error (CV 3 % on both): the replicates show it, and
	// weighted Deming is recommended and covers the truth.
	body := syntheticStudy(7, 100, 0.2, 0.97, func(v float64) float64 { return 0.03 * v }, nil)
	resp := decodeCompare(t, body)
	if resp.ErrorModel.Model != "proportional" {
		t.Fatalf("error model %s, want proportional", resp.ErrorModel.Model)
	}
	if resp.Recommendation.Method != "weighted_deming" {
		t.Errorf("recommended %s: %s", resp.Recommendation.Method, resp.Recommendation.Text)
	}
	w := resp.Fits.WeightedDeming
	if 0.97 < w.Slope.CI.Lower || 0.97 > w.Slope.CI.Upper {
		t.Errorf("weighted Deming slope CI %+v misses 0.97", w.Slope.CI)
	}
	// Its residual SD is relative: means of duplicates with CV 3 % have
	// CV 2.1 % on each axis, so the vertical relative residual is about
	// √(0.021² + 0.97²·0.021²) ≈ 0.03 (generous bounds for n = 100).
	if w.ResidualSD == nil || *w.ResidualSD < 0.02 || *w.ResidualSD > 0.045 {
		t.Errorf("weighted Deming relative residual SD %v, want about 0.03", w.ResidualSD)
	}
}

// syntheticStudy writes a JSON comparison request: true x log-uniform on
// [2, 40], duplicates on both methods with error SD sd(level), in run order.
func syntheticStudy(seed uint64, n int, a, b float64, sd func(float64) float64, outliers map[int]float64) string {
	r := rand.New(rand.NewPCG(seed, 77))
	var s []string
	for i := range n {
		t := 2 * math.Exp(math.Log(20)*r.Float64())
		yt := a + b*t
		d := func(v float64) string {
			return fmt.Sprintf("[%.4f,%.4f]", v+sd(v)*r.NormFloat64(), v+sd(v)*r.NormFloat64())
		}
		ys := d(yt + outliers[i])
		s = append(s, fmt.Sprintf(`{"id":"S%d","order":%d,"x":%s,"y":%s}`, i+1, i+1, d(t), ys))
	}
	return `{"samples":[` + strings.Join(s, ",") + `],"decision_levels":[5,{"level":20,"allowable_bias":{"percent":5}}],"allowable_bias":{"absolute":0.5}}`
}

// Outliers are flagged, never dropped; excluding them is the caller's
// choice, and the answer then shows both analyses.
func TestCompareOutliersAndExclusion(t *testing.T) {
	body := syntheticStudy(3, 60, 0.1, 1.0, func(float64) float64 { return 0.1 }, map[int]float64{10: 4, 30: -5})
	resp := decodeCompare(t, body)
	flagged := map[string]bool{}
	for _, o := range resp.Diagnostics.Outliers.Flagged {
		flagged[o.ID] = true
	}
	if !flagged["S11"] || !flagged["S31"] {
		t.Fatalf("flagged %v, want S11 and S31", flagged)
	}
	if resp.N != 60 || resp.WithoutExcluded != nil {
		t.Error("an outlier was dropped without being asked")
	}
	if resp.Recommendation.Method != "passing_bablok" {
		t.Errorf("recommended %s with outliers", resp.Recommendation.Method)
	}
	body = strings.Replace(body, `"decision_levels"`, `"exclude":["S11","S31"],"decision_levels"`, 1)
	resp = decodeCompare(t, body)
	if resp.N != 60 || resp.WithoutExcluded == nil || resp.WithoutExcluded.N != 58 || len(resp.WithoutExcluded.Excluded) != 2 {
		t.Fatalf("exclusion: n %d without %+v", resp.N, resp.WithoutExcluded)
	}
	if len(resp.WithoutExcluded.Diagnostics.Outliers.Flagged) != 0 {
		t.Errorf("still flagged after exclusion: %+v", resp.WithoutExcluded.Diagnostics.Outliers.Flagged)
	}
}

func TestCompareErrors(t *testing.T) {
	ok := `{"id":"a","x":1,"y":1.1},{"id":"b","x":2,"y":2.2},{"id":"c","x":3,"y":2.9},{"id":"d","x":4,"y":4.2}`
	cases := []struct {
		name, body string
		status     int
		pointer    string
	}{
		{"unknown field", `{"samples":[` + ok + `],"allowable":1}`, 400, "/allowable"},
		{"unknown sample field", `{"samples":[{"x":1,"y":2,"sigma":1}]}`, 400, "/samples/0/sigma"},
		{"replicate not number", `{"samples":[{"x":[1,"a"],"y":2}]}`, 400, "/samples/0/x/1"},
		{"empty replicates", `{"samples":[{"x":[],"y":2}]}`, 400, "/samples/0/x"},
		{"missing y", `{"samples":[{"x":1}]}`, 400, "/samples/0/y"},
		{"x null", `{"samples":[{"x":null,"y":1}]}`, 400, "/samples/0/x"},
		{"bad level", `{"samples":[` + ok + `],"decision_levels":["high"]}`, 400, "/decision_levels/0"},
		{"level object unknown", `{"samples":[` + ok + `],"decision_levels":[{"level":2,"limit":1}]}`, 400, "/decision_levels/0/limit"},
		{"negative allowable", `{"samples":[` + ok + `],"allowable_bias":{"percent":-5}}`, 400, "/allowable_bias/percent"},
		{"empty allowable", `{"samples":[` + ok + `],"allowable_bias":{}}`, 400, "/allowable_bias"},
		{"allowable unknown", `{"samples":[` + ok + `],"allowable_bias":{"relative":5}}`, 400, "/allowable_bias/relative"},
		{"error model", `{"samples":[` + ok + `],"error_model":"linear"}`, 400, "/error_model"},
		{"exclude unknown", `{"samples":[` + ok + `],"exclude":["zz"]}`, 400, "/exclude/0"},
		{"sx on some", `{"samples":[{"x":1,"y":1,"sx":0.1,"sy":0.1},{"x":2,"y":2}]}`, 400, "/samples/1/sx"},
		{"sx without sy", `{"samples":[{"x":1,"y":1,"sx":0.1},{"x":2,"y":2,"sx":0.1}]}`, 400, "/samples/0/sx"},
		{"no samples", `{}`, 400, "/samples"},
		{"two samples", `{"samples":[{"x":1,"y":1},{"x":2,"y":2}]}`, 422, "/samples"},
		{"constant x", `{"samples":[{"x":1,"y":1},{"x":1,"y":2},{"x":1,"y":3}]}`, 422, "/samples"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			req, err := wire.DecodeCompareJSON(strings.NewReader(c.body))
			if err == nil {
				_, err = runCompare(context.Background(), req, defaultSettings)
			}
			if err == nil {
				t.Fatal("no error")
			}
			p := problemOf(t, err)
			if p.Status != c.status || len(p.Errors) == 0 || p.Errors[0].Pointer != c.pointer {
				t.Errorf("status %d errors %+v, want %d at %q", p.Status, p.Errors, c.status, c.pointer)
			}
		})
	}
}

// The CSV form (wide, replicates in x1, x2, y1, y2) gives the same answer
// as the JSON form of the same study.
func TestCompareCSVMatchesJSON(t *testing.T) {
	csv := "id,order,x1,x2,y1,y2\n# a comment\nA,1,1.0,1.1,1.2,1.1\nB,2,2.0,2.1,2.3,2.2\nC,3,3.1,2.9,3.2,3.3\nD,4,4.0,4.2,4.1,4.4\nE,5,5.1,4.9,5.4,5.2\n"
	js := `{"samples":[{"id":"A","order":1,"x":[1.0,1.1],"y":[1.2,1.1]},{"id":"B","order":2,"x":[2.0,2.1],"y":[2.3,2.2]},{"id":"C","order":3,"x":[3.1,2.9],"y":[3.2,3.3]},{"id":"D","order":4,"x":[4.0,4.2],"y":[4.1,4.4]},{"id":"E","order":5,"x":[5.1,4.9],"y":[5.4,5.2]}],"decision_levels":[2.5],"allowable_bias":{"absolute":0.3}}`
	req, err := wire.CompareFromCSV(strings.NewReader(csv), map[string][]string{"decision_levels": {"2.5"}, "allowable_absolute": {"0.3"}})
	if err != nil {
		t.Fatal(err)
	}
	a, err := runCompare(context.Background(), req, defaultSettings)
	if err != nil {
		t.Fatal(err)
	}
	b := decodeCompare(t, js)
	ja, _ := json.Marshal(a)
	jb, _ := json.Marshal(b)
	if string(ja) != string(jb) {
		t.Errorf("CSV and JSON differ:\n%s\n%s", ja, jb)
	}
	for _, c := range []struct{ body, pointer string }{
		{"id,x1,y1,z\n", "row 1, column z"},
		{"id,x1,x2,y1\nA,1,,\n", "row 2, column y"},
		{"id,x1,y1\nA,1,abc\n", "row 2, column y1"},
	} {
		_, err := wire.DecodeCompareCSV(strings.NewReader(c.body))
		if p := problemOf(t, err); p.Errors[0].Pointer != c.pointer {
			t.Errorf("%q: pointer %q, want %q", c.body, p.Errors[0].Pointer, c.pointer)
		}
	}
}
