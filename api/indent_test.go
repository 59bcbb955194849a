package api

import (
	"bytes"
	"encoding/json"
	"os"
	"testing"
)

// indentJSON must give json.Indent's bytes exactly.
func TestIndentJSONMatchesEncoding(t *testing.T) {
	samples := []string{`{}`, `[]`, `{"a":[]}`, `{"a":{},"b":[1,2,{"c":"x,y:{}[]\"\\"}],"d":null,"e":true}`,
		`[{"k":"\u00e9\n"},[],[[]],{"z":-1.5e-7}]`, `"plain"`, `3`}
	resp, _ := os.ReadFile("../testdata/pearson-york.csv")
	if d, err := DecodeCSV(bytes.NewReader(resp)); err == nil {
		if r, err := Fit(t.Context(), &FitRequest{Points: *d, At: []float64{3}}, DefaultSettings); err == nil {
			b, _ := json.Marshal(r)
			samples = append(samples, string(b))
		}
	}
	for _, s := range samples {
		var want bytes.Buffer
		if err := json.Indent(&want, []byte(s), "", "  "); err != nil {
			t.Fatal(err)
		}
		if got := indentJSON(nil, []byte(s)); string(got) != want.String() {
			t.Errorf("indent of %.60s:\ngot  %s\nwant %s", s, got, want.String())
		}
	}
}
