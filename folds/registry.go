package folds

// entry is one fold rule of the registry.
type entry struct {
	name     string // the rule's name, before any "="
	syntax   string // its written form, for messages
	takesArg bool   // written name=VALUE
	// parse returns the rule of the value after "=" ("" when there is none).
	parse func(arg string) (Rule, error)
}

// registry lists the fold rules, one line each; ParseRule looks a rule up
// here by name. A new rule is one file (its type, its assigner, its parse
// function) and one line here.
var registry = []entry{
	{name: "rows", syntax: "rows", parse: parseRows},
	{name: "stratified", syntax: "stratified", parse: parseStratified},
	{name: "group", syntax: "group=COL", takesArg: true, parse: parseGroup},
	{name: "ordered", syntax: "ordered", parse: parseOrdered},
}
