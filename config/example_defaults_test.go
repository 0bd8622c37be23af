package config

import (
	"reflect"
	"testing"
)

// diffFields returns, for two values of the same struct type, the names of
// the exported top-level fields that differ (compared with
// reflect.DeepEqual).
func diffFields(got, want any) []string {
	g, w := reflect.ValueOf(got), reflect.ValueOf(want)
	var out []string
	for i := range g.NumField() {
		if !g.Type().Field(i).IsExported() {
			continue
		}
		if !reflect.DeepEqual(g.Field(i).Interface(), w.Field(i).Interface()) {
			out = append(out, g.Type().Field(i).Name)
		}
	}
	return out
}

// TestExampleShowsDefaults: example.yaml says every key is shown with its
// default, so its first model (example-linear, which sets every model key
// but features, threshold and score_subject) must equal DefaultModel() once
// its name and subject are set, and its top-level keys must equal
// Default(). Source: the defaults are this product's own (config/types.go);
// the test only keeps the example file and the code in agreement.
func TestExampleShowsDefaults(t *testing.T) {
	ex, err := Load("example.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if len(ex.Models) == 0 {
		t.Fatal("example.yaml has no models")
	}
	got := ex.Models[0]
	want := DefaultModel()
	want.Name, want.Subject = got.Name, got.Subject
	// "features: []" in the file is an empty list; the default is no list.
	if len(got.Features) == 0 && got.Features != nil {
		got.Features = nil
	}
	if !reflect.DeepEqual(got, want) {
		for _, f := range diffFields(got, want) {
			t.Errorf("models[0].%s = %+v in example.yaml, DefaultModel() has %+v",
				f, reflect.ValueOf(got).FieldByName(f), reflect.ValueOf(want).FieldByName(f))
		}
	}

	// The threshold block shown for example-logistic is the default one.
	if len(ex.Models) > 1 && ex.Models[1].Threshold != want.Threshold {
		t.Errorf("models[1].threshold = %+v in example.yaml, default %+v", ex.Models[1].Threshold, want.Threshold)
	}

	top := *ex
	top.Models = nil
	top.src = nil // where the file came from, not a setting
	if def := *Default(); !reflect.DeepEqual(top, def) {
		for _, f := range diffFields(top, def) {
			t.Errorf("%s = %+v in example.yaml, Default() has %+v",
				f, reflect.ValueOf(top).FieldByName(f), reflect.ValueOf(def).FieldByName(f))
		}
	}
}
