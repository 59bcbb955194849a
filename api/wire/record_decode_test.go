package wire_test

import (
	"strings"
	"testing"

	"eivfit/api/wire"
)

// TestRecordDecodersStrict: revisions, signatures and options patches are
// read by the one-pass reader: strict keys, numbers and lists counted at
// their limit, errors naming the pointer.
func TestRecordDecodersStrict(t *testing.T) {
	at := `[` + repeatJSON("1", wire.DefaultLimits.MaxAt+1) + `,@@@`
	cases := []struct {
		name, pointer string
		run           func() error
	}{
		{"patch case-variant key", "/options/METHODS", func() error { return (&wire.FitRequest{}).PatchOptions([]byte(`{"METHODS":["ols"]}`)) }},
		{"patch repeated key", "/options/lambda", func() error { return (&wire.FitRequest{}).PatchOptions([]byte(`{"lambda":1,"lambda":2}`)) }},
		{"patch data key", "/options/points", func() error { return (&wire.FitRequest{}).PatchOptions([]byte(`{"points":[]}`)) }},
		{"patch at over the limit", "/options/at", func() error { return (&wire.FitRequest{}).PatchOptions([]byte(`{"at":` + at)) }},
		{"patch comparison samples", "/options/samples", func() error { return (&wire.CompareRequest{}).PatchOptions([]byte(`{"samples":[]}`)) }},
		{"patch calibration trials", "/options/monte_carlo/trials", func() error {
			return (&wire.CalibrationRequest{}).PatchOptions([]byte(`{"monte_carlo":{"trials":1.5}}`))
		}},
		{"revise unknown key", "/reasons", func() error {
			_, err := wire.DecodeRevise(strings.NewReader(`{"reasons":"x","based_on":0}`))
			return err
		}},
		{"revise options not an object", "/options", func() error {
			_, err := wire.DecodeRevise(strings.NewReader(`{"reason":"x","based_on":0,"options":[1]}`))
			return err
		}},
		{"revise exclusion without reason", "/exclude/0/reason", func() error {
			_, err := wire.DecodeRevise(strings.NewReader(`{"reason":"x","based_on":0,"exclude":[{"id":"S1"}]}`))
			return err
		}},
		{"sign repeated key", "/meaning", func() error {
			_, err := wire.DecodeSign(strings.NewReader(`{"meaning":"reviewed","meaning":"approved"}`))
			return err
		}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			err := c.run()
			if err == nil {
				t.Fatal("no error")
			}
			p := problemOf(t, err)
			if len(p.Errors) == 0 || p.Errors[0].Pointer != c.pointer {
				t.Errorf("errors %+v, want pointer %q", p.Errors, c.pointer)
			}
		})
	}
	req := &wire.FitRequest{}
	if err := req.PatchOptions([]byte(`{"methods":["ols"],"lambda":2,"x_unit":"mg"}`)); err != nil || req.Methods[0] != "ols" || *req.Lambda != 2 || req.XUnit != "mg" {
		t.Errorf("patch: %v %+v", err, req)
	}
}
