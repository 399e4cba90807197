package param

import (
	"errors"
	"fmt"
	"io"
	"testing"
)

const (
	folds  Name = "folds"
	scheme Name = "scheme"
)

// flag spells folds and scheme as a command's flags and leaves other
// names alone.
func flag(n Name) string {
	switch n {
	case folds:
		return "--folds"
	case scheme:
		return "--scheme"
	}
	return ""
}

func TestTextNamesOrSpells(t *testing.T) {
	tx := Textf("%s %d: want 2 to %d (for leave-one-out give %s loo)", folds, 1, 100, scheme)
	if got, want := tx.String(), "folds 1: want 2 to 100 (for leave-one-out give scheme loo)"; got != want {
		t.Errorf("String: %q, want %q", got, want)
	}
	if got, want := tx.Spell(flag), "--folds 1: want 2 to 100 (for leave-one-out give --scheme loo)"; got != want {
		t.Errorf("Spell: %q, want %q", got, want)
	}
	if got, want := Textf("%s %q", Name("other"), "folds").Spell(flag), `other "folds"`; got != want {
		t.Errorf("a name without a spelling, and a string that is not a Name: %q, want %q", got, want)
	}
	if got, want := Textf("100%% of %s", folds).Spell(flag), "100% of --folds"; got != want {
		t.Errorf("a literal percent: %q, want %q", got, want)
	}
}

func TestNestedAndWrapped(t *testing.T) {
	inner := Errorf("%s %d: too many", folds, 200)
	outer := Errorf("column %q: %v", "route", inner)
	if got, want := outer.Error(), `column "route": folds 200: too many`; got != want {
		t.Errorf("Error: %q, want %q", got, want)
	}
	if got, want := outer.Spell(flag), `column "route": --folds 200: too many`; got != want {
		t.Errorf("Spell: %q, want %q", got, want)
	}
	if got, want := Textf("x%s", Textf("; give %s", scheme)).Spell(flag), "x; give --scheme"; got != want {
		t.Errorf("a Text in a Text: %q, want %q", got, want)
	}
	if got := Textf("x%s", Text{}).String(); got != "x" {
		t.Errorf("an empty Text prints %q, want nothing", got)
	}
	w := Errorf("%s column: %v", Name("with"), fmt.Errorf("read: %w", io.ErrUnexpectedEOF))
	if !errors.Is(w, io.ErrUnexpectedEOF) {
		t.Errorf("%v does not unwrap to its argument's error", w)
	}
	var e *Error
	if !errors.As(fmt.Errorf("ctx: %w", outer), &e) || e != outer {
		t.Errorf("errors.As does not find the Error")
	}
}
