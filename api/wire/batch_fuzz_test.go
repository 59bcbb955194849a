package wire

import "testing"

// The batch reader and its entry reader never panic, and refuse with a
// problem naming a place.
func FuzzBatchJSON(f *testing.F) {
	for _, s := range []string{
		`{"datasets":[{"name":"a","points":[{"x":1,"y":2},{"x":2,"y":3},{"x":3,"y":5}],"methods":["ols"]},{}]}`,
		`{"datasets":[{"name":"a","name":"b"},{"METHODS":[]},[],1,"x",null,{"bootstrap":{"seed":null}}]}`,
		`{"datasets":[[[[[[]]]]]]}`, `{"datasets":null}`, `{"Datasets":[]}`, `{`, ``,
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
