package pipeline_test

import (
	"errors"
	"strings"
	"testing"

	"manyfold/encoders/method"
	"manyfold/encoders/pipeline"
	"manyfold/folds"
	"manyfold/internal/param"
	"manyfold/io/csvio"
)

// TestMessagesNameParams: the package's errors name the Spec's parameters
// in its own words, never a command's flags, and a caller can spell them
// its own way (param.Speller).
func TestMessagesNameParams(t *testing.T) {
	upper := func(n param.Name) string { return "<" + strings.ToUpper(string(n)) + ">" }
	freq, _ := method.ParsePlan("freq")
	target, _ := method.ParsePlan("target:eb")
	stratified, _ := folds.ParseRule("stratified")
	spec := func(f func(sp *pipeline.Spec)) pipeline.Spec {
		sp := pipeline.DefaultSpec()
		sp.Columns = []string{"a"}
		sp.Encodings = freq
		f(&sp)
		return sp
	}
	tests := []struct {
		sp             pipeline.Spec
		plain, spelled string
	}{
		{spec(func(sp *pipeline.Spec) { sp.Folds = 1 }),
			"folds 1: want 2 to 100 (for leave-one-out give scheme loo)",
			"<FOLDS> 1: want 2 to 100 (for leave-one-out give <SCHEME> loo)"},
		{spec(func(sp *pipeline.Spec) { sp.Columns = nil }), "no columns to encode: give columns", "no columns to encode: give <COLUMNS>"},
		{spec(func(sp *pipeline.Spec) { sp.Columns = []string{"a", "a"} }), `column "a" is named twice in columns`, `column "a" is named twice in <COLUMNS>`},
		{spec(func(sp *pipeline.Spec) { sp.Encodings = target }), "the target encodings need target", "the target encodings need <TARGET>"},
		{spec(func(sp *pipeline.Spec) { sp.FoldBy = stratified }), "the fold rule stratified needs target", "the fold rule stratified needs <TARGET>"},
		{spec(func(sp *pipeline.Spec) { sp.Encodings = method.Plan{} }), "no encodings: give encodings", "no encodings: give <ENCODINGS>"},
	}
	for _, tc := range tests {
		err := tc.sp.Validate()
		var ue *pipeline.UsageError
		if !errors.As(err, &ue) {
			t.Errorf("%q: error %v, want a UsageError", tc.plain, err)
			continue
		}
		if got := ue.Error(); got != tc.plain {
			t.Errorf("Error: %q, want %q", got, tc.plain)
		}
		if got := ue.Spell(upper); got != tc.spelled {
			t.Errorf("Spell: %q, want %q", got, tc.spelled)
		}
	}
	if got, want := pipeline.CheckThreads(0).Error(), "threads 0: want at least 1"; got != want {
		t.Errorf("CheckThreads: %q, want %q", got, want)
	}
}

// TestColumnErrorNamesParam: a column the input lacks is reported with the
// parameter that names it (ColumnError.Param), by its name in Error and as
// the caller spells it in Spell.
func TestColumnErrorNamesParam(t *testing.T) {
	r, err := csvio.NewReader(strings.NewReader("route,late\nR1,1\nR2,0\n"), "t.csv", csvio.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	sp := pipeline.DefaultSpec()
	sp.Columns = []string{"route"}
	sp.Target = "lat"
	_, err = pipeline.Fit(r, sp, pipeline.FitOptions{File: "t.csv"})
	var ce *pipeline.ColumnError
	if !errors.As(err, &ce) || ce.Param != pipeline.ParamTarget {
		t.Fatalf("error %v, want a ColumnError of the target", err)
	}
	if got, want := ce.Error(), `t.csv: target names column "lat", which the file does not have; closest: "late"`; got != want {
		t.Errorf("Error: %q, want %q", got, want)
	}
	flag := func(n param.Name) string { return "--" + string(n) }
	if got, want := ce.Spell(flag), `t.csv: --target names column "lat", which the file does not have; closest: "late"`; got != want {
		t.Errorf("Spell: %q, want %q", got, want)
	}
}
