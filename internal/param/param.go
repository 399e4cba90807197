// Package param lets a library name the parameters of its calls in its
// messages without naming a command's flags. A library names a parameter
// in its own words, a field of its options ("folds", "target", "fold
// rule"), with a Name, and builds the message as a Text; the message
// prints the names as they are, and a command that sets those options
// from flags prints each name as its flag instead (Text.Spell), so that
// the library's messages read as the command line the user typed.
package param

import "fmt"

// Name is a parameter of a library call, in the library's words: a field
// of its options, such as "folds" for Spec.Folds.
type Name string

// Speller returns how a caller spells a parameter (a command: the flag
// that sets it), or "" to print its name.
type Speller func(Name) string

// Spellable is a message that names parameters, printed with each name as
// a Speller spells it.
type Spellable interface {
	Spell(Speller) string
}

// Text is a message that names parameters: a format and its arguments as
// for fmt.Sprintf, among which a Name prints as the parameter's name, or
// as the Speller spells it (Spell), and so does every name inside a
// Spellable argument (a Text, an error of this package or of a library).
type Text struct {
	Format string
	Args   []any
}

// Textf returns the Text of a format and its arguments.
func Textf(format string, a ...any) Text { return Text{Format: format, Args: a} }

// String returns the message with each parameter by its name.
func (t Text) String() string { return t.Spell(nil) }

// Spell returns the message with each parameter spelled by spell (by its
// name where spell is nil or returns "").
func (t Text) Spell(spell Speller) string {
	args := make([]any, len(t.Args))
	for i, a := range t.Args {
		switch a := a.(type) {
		case Name:
			args[i] = Spell(spell, a)
		case Spellable:
			args[i] = a.Spell(spell)
		default:
			args[i] = a
		}
	}
	return fmt.Sprintf(t.Format, args...)
}

// Spell returns the spelling of one parameter: spell's, or its name where
// spell is nil or returns "".
func Spell(spell Speller, n Name) string {
	if spell != nil {
		if s := spell(n); s != "" {
			return s
		}
	}
	return string(n)
}

// Error is an error whose message is a Text. It unwraps to the errors
// among the Text's arguments.
type Error struct{ Text Text }

// Errorf returns an Error of a format and its arguments; an error among
// them prints with %v and is unwrapped.
func Errorf(format string, a ...any) *Error { return &Error{Textf(format, a...)} }

func (e *Error) Error() string { return e.Text.String() }

// Spell returns the message with each parameter spelled by spell.
func (e *Error) Spell(spell Speller) string { return e.Text.Spell(spell) }

// Unwrap returns the errors among the message's arguments.
func (e *Error) Unwrap() []error {
	var errs []error
	for _, a := range e.Text.Args {
		if err, ok := a.(error); ok {
			errs = append(errs, err)
		}
	}
	return errs
}
