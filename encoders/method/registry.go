package method

import (
	"fmt"
	"strings"
)

// registry lists the methods, in the order the help text names them. A new
// method is a file of its own and one line here.
var registry = []Method{
	targetMethod{},
	freqMethod{},
	topKMethod{},
	hashMethod{},
	woeMethod{},
	oneHotMethod{},
}

// Lookup returns the method named name.
func Lookup(name string) (Method, bool) {
	for _, m := range registry {
		if m.Name() == name {
			return m, true
		}
	}
	return nil, false
}

// Help lists every method's grammar and summary, for the commands' help.
func Help() string {
	var b strings.Builder
	for _, m := range registry {
		fmt.Fprintf(&b, "  %s\n", m.Syntax())
		line := "       "
		for _, w := range strings.Fields(m.Summary()) {
			if len(line)+1+len(w) > 78 {
				b.WriteString(line + "\n")
				line = "       "
			}
			line += " " + w
		}
		b.WriteString(line + "\n")
	}
	return b.String()
}

// Names returns the registered methods' names.
func Names() []string {
	out := make([]string, len(registry))
	for i, m := range registry {
		out[i] = m.Name()
	}
	return out
}
