package method

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

// Names returns the registered methods' names.
func Names() []string {
	out := make([]string, len(registry))
	for i, m := range registry {
		out[i] = m.Name()
	}
	return out
}
