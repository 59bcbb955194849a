package wire

import (
	"bytes"
	"testing"
)

// The batch reader and its entry reader never panic, and refuse with a
// problem naming a place.
func FuzzBatchJSON(f *testing.F) {
	for _, s := range []string{
		`{"datasets":[{"name":"a","points":[{"x":1,"y":2},{"x":2,"y":3},{"x":3,"y":5}],"methods":["ols"]},{}]}`,
		`{"datasets":[{"name":"a","name":"b"},{"METHODS":[]},[],1,"x",null,{"bootstrap":{"seed":null}}]}`,
		`{"datasets":[[[[[[]]]]]]}`, `{"datasets":null}`, `{"Datasets":[]}`, `{`, ``,
		`{"defaults":{"methods":["ols"],"decision_levels":[7,{"level":9}],"bootstrap":{"resamples":10,"seed":1}},"datasets":[{"points":[{"x":1,"y":2}]},{"kind":"method-comparison","samples":[{"id":"a","x":1,"y":2}]}]}`,
		`{"defaults":{"at":[1]},"datasets":[{"kind":"method-comparison","name":"n","points":[]},{"kind":1},{"kind":"x","at":[2]}]}`,
		`{"datasets":[{"name":"a","samples":[]}],"defaults":null}`,
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		var req BatchRequest
		if err := decodeBatch(data, &req, Limits{Limits: DefaultLimits.Limits, MaxBatch: 50}); err != nil {
			if _, ok := err.(*Problem); !ok {
				t.Fatalf("not a problem: %v", err)
			}
			return
		}
		for _, raw := range req.Datasets {
			var e BatchEntry
			if err := decodeBatchEntry(raw, &e, DefaultLimits, req.fit, req.cmp); err != nil {
				if _, ok := err.(*Problem); !ok {
					t.Fatalf("not a problem: %v", err)
				}
			}
		}
	})
}

// The group options reader never panics, and refuses with a problem.
func FuzzGroupOptions(f *testing.F) {
	for _, s := range []string{
		`{"glucose":{"decision_levels":[3.9,7],"allowable_bias":{"percent":5}},"crp":{"methods":["ols"],"at":[1]}}`,
		`{"A":{"confidence":0.9},"A":{}}`, `{"a":{"points":[]}}`, `{"a":[]}`, `[]`, `{`, ``, `{"\u0041":{"lambda":1}} x`,
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		g, err := DecodeGroupOptions(bytes.NewReader(data))
		if err != nil {
			if _, ok := err.(*Problem); !ok {
				t.Fatalf("not a problem: %v", err)
			}
			return
		}
		for _, kind := range []string{DatasetFit, DatasetComparison} {
			if err := g.Check(kind, g.order); err == nil {
				for _, name := range g.order {
					g.Fit(name, &FitRequest{})
					g.Compare(name, &CompareRequest{})
				}
			} else if _, ok := err.(*Problem); !ok {
				t.Fatalf("not a problem: %v", err)
			}
		}
	})
}
