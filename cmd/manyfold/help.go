package main

import (
	"errors"
	"fmt"
	"slices"
	"strings"

	"github.com/spf13/pflag"

	"manyfold/encoders/pipeline"
)

// requiredFlags are the flags each command cannot run without: its help
// marks them "(required)", and TestRequiredFlagsEnforced checks that the
// command refuses to run without each.
var requiredFlags = map[string][]string{
	"encode":  {"out", "tables"},
	"apply":   {"tables", "out"},
	"merge":   {"tables"},
	"compare": {"target", "columns"},
}

// exitCodesText is the list of exit codes (exitCodes) as the help prints it.
func exitCodesText() string {
	var b strings.Builder
	b.WriteString("Exit codes:\n")
	for _, c := range exitCodes {
		fmt.Fprintf(&b, "  %-4d %s\n", c.code, c.meaning)
	}
	return b.String()
}

// commandUsage writes a command's help: its text, its flags, each with its
// default or marked required, and the exit codes.
func commandUsage(fs *pflag.FlagSet, text string) string {
	return text + "\nFlags:\n" + flagUsages(fs, requiredFlags[fs.Name()]) + "\n" + exitCodesText()
}

// flagUsages lists the flags of fs, one a line, aligned: the flag, its
// value's name, its help and then its default, which every flag shows (a
// flag's help that states its default itself, "(default: ...)", keeps its
// own words; an empty text or list is "none"), or "(required)" for the
// flags named in required.
func flagUsages(fs *pflag.FlagSet, required []string) string {
	type line struct{ flag, help string }
	var lines []line
	width := 0
	fs.VisitAll(func(f *pflag.Flag) {
		if f.Hidden {
			return
		}
		name, help := pflag.UnquoteUsage(f)
		l := line{flag: "  --" + f.Name, help: help + defaultText(f, slices.Contains(required, f.Name))}
		if f.Shorthand != "" {
			l.flag = "  -" + f.Shorthand + ", --" + f.Name
		}
		if name != "" {
			l.flag += " " + name
		}
		width = max(width, len(l.flag))
		lines = append(lines, l)
	})
	var b strings.Builder
	indent := width + 3
	for _, l := range lines {
		for i, part := range wrapWords(l.help, max(helpColumns-indent, 30)) {
			if i == 0 {
				fmt.Fprintf(&b, "%-*s%s\n", indent, l.flag, part)
			} else {
				fmt.Fprintf(&b, "%*s%s\n", indent, "", part)
			}
		}
	}
	return b.String()
}

// helpColumns is the width the flags' help is wrapped to.
const helpColumns = 80

// wrapWords breaks text into lines of at most width bytes at spaces (a
// longer word stands on a line of its own).
func wrapWords(text string, width int) []string {
	var lines []string
	line := ""
	for _, w := range strings.Fields(text) {
		switch {
		case line == "":
			line = w
		case len(line)+1+len(w) <= width:
			line += " " + w
		default:
			lines = append(lines, line)
			line = w
		}
	}
	return append(lines, line)
}

// defaultText is what a flag's line says of its default.
func defaultText(f *pflag.Flag, required bool) string {
	switch {
	case required:
		return " (required)"
	case strings.Contains(f.Usage, "(default"):
		return ""
	case f.DefValue == "" || f.DefValue == "[]":
		return " (default: none)"
	case f.Value.Type() == "string":
		return fmt.Sprintf(" (default %q)", f.DefValue)
	}
	return " (default " + f.DefValue + ")"
}

// unknownFlag adds to pflag's error for a flag fs does not have the
// closest flag's name, if one is close (closeName): "unknown flag:
// --colums; did you mean --columns?".
func unknownFlag(fs *pflag.FlagSet, err error) string {
	var ne *pflag.NotExistError
	if !errors.As(err, &ne) || ne.GetSpecifiedShortnames() != "" {
		return err.Error()
	}
	var names []string
	fs.VisitAll(func(f *pflag.Flag) {
		if !f.Hidden {
			names = append(names, f.Name)
		}
	})
	if c, ok := closeName(ne.GetSpecifiedName(), names); ok {
		return fmt.Sprintf("%v; did you mean --%s?", err, c)
	}
	return err.Error()
}

// closeName returns the name of names closest to name, when it is within
// max(2, len(name)/3) edits: closer than Closest's bound, made for column
// names, since among a command's few short names or flags one is always
// within half a word's edits (--out is not a misspelled --rows).
func closeName(name string, names []string) (string, bool) {
	c := pipeline.Closest(name, names, 1)
	if len(c) == 0 || pipeline.EditDistance(name, c[0]) > max(2, len(name)/3) {
		return "", false
	}
	return c[0], true
}

// unknownCommand is the message for a command manyfold does not have,
// with the closest command's name if one is close.
func unknownCommand(name string) string {
	names := []string{"help", "version"}
	for _, c := range commands {
		names = append(names, c.name)
	}
	msg := fmt.Sprintf("unknown command %q", name)
	if c, ok := closeName(name, names); ok {
		msg += fmt.Sprintf("; did you mean %s?", c)
	}
	return msg
}
