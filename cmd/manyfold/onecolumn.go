package main

import (
	"fmt"
	"io"
	"slices"
	"strings"
	"sync"

	"manyfold/io/csvio"
)

// oneColumnNotes gathers, while a command runs, the CSV inputs that read
// as one column whose header holds another delimiter (csvio's OneColumn,
// set by inputFlags.options for every command that reads input), so that
// the command warns once per file when it succeeds; a command that fails
// on such a file already says "did you mean --delimiter" in its error.
type oneColumnNotes struct {
	mu    sync.Mutex
	files []string
	lines []string
}

// oneColumn is the run's notes (runCommand resets and prints them).
var oneColumn oneColumnNotes

// note records one file, once however often the command opens it.
func (n *oneColumnNotes) note(file, header string, guess byte) {
	n.mu.Lock()
	defer n.mu.Unlock()
	if slices.Contains(n.files, file) {
		return
	}
	n.files = append(n.files, file)
	n.lines = append(n.lines, fmt.Sprintf("warning: %s reads as one column, %q: %s", file, header, csvio.DelimiterHint(guess).Spell(flagOf)))
}

// reset forgets the notes of an earlier run.
func (n *oneColumnNotes) reset() {
	n.mu.Lock()
	defer n.mu.Unlock()
	n.files, n.lines = nil, nil
}

// rename makes the warnings name a spooled input (standard input read
// from a temporary file) by the name the user gave.
func (n *oneColumnNotes) rename(from, to string) {
	n.mu.Lock()
	defer n.mu.Unlock()
	for i, l := range n.lines {
		n.lines[i] = strings.ReplaceAll(l, from, to)
	}
}

// print writes the warnings, one line each.
func (n *oneColumnNotes) print(w io.Writer) {
	n.mu.Lock()
	defer n.mu.Unlock()
	for _, l := range n.lines {
		fmt.Fprintln(w, l)
	}
}
