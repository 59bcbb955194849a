package study_test

import (
	"context"
	"errors"
	"math"
	"testing"

	"eivfit/eiv/study"
)

// Every error of a fit is a *study.Error (alone or first in an ErrorList)
// that says what is wrong (Kind) and where: the field, the point or list
// entry, the method. api/wire turns that place into a JSON pointer, a CSV
// cell, a query parameter or a flag (TestValidateAndFitErrors there). A
// failure of the data, not of one method, names the first method that met
// it (ols, first in the registry).
func TestFitErrors(t *testing.T) {
	ok := study.Data{X: []float64{1, 2, 3, 4}, Y: []float64{2, 3.1, 3.9, 5.2},
		SX: []float64{0.1, 0.1, 0.1, 0.1}, SY: []float64{0.1, 0.1, 0.1, 0.1}}
	plain := study.Data{X: []float64{1, 2, 3}, Y: []float64{2, 3, 5}}
	f := func(v float64) *float64 { return &v }
	withSX := func(i int, v float64) study.Data {
		d := ok
		d.SX = append([]float64(nil), ok.SX...)
		d.SX[i] = v
		return d
	}
	long := func(n int, field string, at int) study.Data {
		var d study.Data
		for i := range n {
			d.X, d.Y = append(d.X, float64(i)), append(d.Y, 2*float64(i)+float64(i%3))
			d.SX, d.SY = append(d.SX, 0.5), append(d.SY, 0.5)
		}
		map[string][]float64{"sx": d.SX, "sy": d.SY}[field][at] = map[string]float64{"sx": -1, "sy": math.NaN()}[field]
		return d
	}
	for _, c := range []struct {
		name   string
		data   study.Data
		opt    study.FitOptions
		kind   study.Kind
		field  string
		index  int
		method string
	}{
		{"no points", study.Data{}, study.FitOptions{}, study.Invalid, study.FieldData, -1, ""},
		{"negative sx", withSX(3, -1), study.FitOptions{}, study.Invalid, "sx", 3, ""},
		// A long column is checked in halves: a fault in either is found.
		{"NaN sy late in a long column", long(70_000, "sy", 69_998), study.FitOptions{}, study.Invalid, "sy", 69_998, ""},
		{"negative sx early in a long column", long(70_000, "sx", 5), study.FitOptions{}, study.Invalid, "sx", 5, ""},
		{"r = 1", study.Data{X: ok.X, Y: ok.Y, SX: ok.SX, SY: ok.SY, R: []float64{1, 0, 0, 0}}, study.FitOptions{}, study.Invalid, "r", 0, ""},
		{"unknown method", ok, study.FitOptions{Methods: []string{"ols", "passing"}}, study.Invalid, "methods", 1, ""},
		{"duplicate method", ok, study.FitOptions{Methods: []string{"ols", "ols"}}, study.Invalid, "methods", 1, ""},
		{"lambda zero", ok, study.FitOptions{Lambda: f(0)}, study.Invalid, "lambda", -1, ""},
		{"confidence 1", ok, study.FitOptions{Confidence: f(1)}, study.Invalid, "confidence", -1, ""},
		{"confidence rounds to 1", ok, study.FitOptions{Confidence: f(0.9999999999999999)}, study.Invalid, "confidence", -1, ""},
		{"resamples few", ok, study.FitOptions{Bootstrap: &study.BootstrapOptions{Resamples: 10}}, study.Invalid, "bootstrap/resamples", -1, ""},
		{"scheme", ok, study.FitOptions{Bootstrap: &study.BootstrapOptions{Resamples: 200, Scheme: "wild"}}, study.Invalid, "bootstrap/scheme", -1, ""},
		{"parametric without sigma", plain, study.FitOptions{Bootstrap: &study.BootstrapOptions{Resamples: 200, Scheme: "parametric"}}, study.Invalid, "bootstrap/scheme", -1, ""},
		{"too many points", ok, study.FitOptions{Settings: study.Settings{Limits: study.Limits{MaxPoints: 3}}}, study.TooLarge, study.FieldData, -1, ""},
		{"two points", study.Data{X: []float64{1, 2}, Y: []float64{2, 3}}, study.FitOptions{}, study.Unfittable, study.FieldData, -1, "ols"},
		{"constant x", study.Data{X: []float64{1, 1, 1}, Y: []float64{2, 3, 5}}, study.FitOptions{}, study.Unfittable, study.FieldData, -1, "ols"},
		{"york without sigma", plain, study.FitOptions{Methods: []string{"york"}}, study.Unfittable, study.FieldMethod, -1, "york"},
		{"york zero sigmas", study.Data{X: []float64{1, 2, 3}, Y: []float64{2, 3.1, 3.9}, SX: []float64{0, 0.1, 0.1}, SY: []float64{0, 0.1, 0.1}},
			study.FitOptions{Methods: []string{"york"}}, study.Unfittable, "sy", 0, "york"},
		{"weighted deming at zero", study.Data{X: []float64{0, 2, 3}, Y: []float64{2, 3, 5}}, study.FitOptions{Methods: []string{"weighted_deming"}}, study.Unfittable, "x", 0, "weighted_deming"},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := study.Fit(context.Background(), c.data, &c.opt)
			var e *study.Error
			if !errors.As(err, &e) {
				t.Fatalf("want a *study.Error, got %T %v", err, err)
			}
			if e.Kind != c.kind || e.Field != c.field || e.Index != c.index || e.Method != c.method {
				t.Errorf("got %v %q[%d] method %q (%v); want %v %q[%d] method %q",
					e.Kind, e.Field, e.Index, e.Method, e, c.kind, c.field, c.index, c.method)
			}
		})
	}
}
