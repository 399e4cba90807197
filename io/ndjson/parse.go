package ndjson

import (
	"fmt"
	"strconv"
	"unicode/utf16"
	"unicode/utf8"

	"manyfold/io/table"
)

// jsonKind is the JSON type of a value.
type jsonKind uint8

const (
	jsonNull jsonKind = iota
	jsonString
	jsonNumber
	jsonBool
)

// value is one key and value of the line being parsed. key and text alias
// the line or Reader.scr (unescaped strings), valid until the next parse.
type value struct {
	key  []byte
	text []byte // a string unescaped, a number as written, true or false
	kind jsonKind
}

// parser walks one line.
type parser struct {
	b   []byte
	pos int
}

// parse reads the line text (line no) as one flat object into r.vals.
func (r *Reader) parse(no int64, text []byte) error {
	r.parsed = no
	r.gen++
	r.vals = r.vals[:0]
	// Unescaped strings are never longer than as written: with room for
	// the whole line, appending never moves scr, so values may alias it.
	if cap(r.scr) < len(text) {
		r.scr = make([]byte, 0, len(text))
	}
	r.scr = r.scr[:0]
	p := parser{b: text}
	fail := func(key []byte, msg string, a ...any) error {
		e := &table.DataError{File: r.name, Line: no, Err: fmt.Errorf("%w: "+msg, append([]any{ErrSyntax}, a...)...)}
		if key != nil {
			e.Column = string(key)
		}
		return e
	}
	p.space()
	if !p.eat('{') {
		return fail(nil, "the line does not start with {, at byte %d", p.pos+1)
	}
	p.space()
	if !p.eat('}') {
		for {
			p.space()
			if p.peek() != '"' {
				return fail(nil, "want a key in quotes at byte %d, found %s", p.pos+1, p.show())
			}
			key, err := r.str(&p)
			if err != nil {
				return fail(nil, "key at byte %d: %v", p.pos+1, err)
			}
			p.space()
			if !p.eat(':') {
				return fail(key, "want : after the key at byte %d, found %s", p.pos+1, p.show())
			}
			p.space()
			v := value{key: key}
			switch c := p.peek(); {
			case c == '"':
				if v.text, err = r.str(&p); err != nil {
					return fail(key, "value at byte %d: %v", p.pos+1, err)
				}
				v.kind = jsonString
			case c == '{' || c == '[':
				what := map[byte]string{'{': "an object", '[': "an array"}[c]
				return &table.DataError{File: r.name, Line: no, Column: string(key),
					Err: fmt.Errorf("%w: the value is %s; only strings, numbers, true, false and null are read (flatten the records first)", ErrNested, what)}
			case c == '-' || (c >= '0' && c <= '9'):
				start := p.pos
				if !p.number() {
					return fail(key, "bad number at byte %d", start+1)
				}
				v.text, v.kind = p.b[start:p.pos], jsonNumber
			case p.word("true"):
				v.text, v.kind = p.b[p.pos-4:p.pos], jsonBool
			case p.word("false"):
				v.text, v.kind = p.b[p.pos-5:p.pos], jsonBool
			case p.word("null"):
			default:
				return fail(key, "want a value at byte %d, found %s", p.pos+1, p.show())
			}
			r.vals = append(r.vals, v)
			p.space()
			if p.eat('}') {
				break
			}
			if !p.eat(',') {
				return fail(key, "want , or } at byte %d, found %s", p.pos+1, p.show())
			}
		}
	}
	p.space()
	if p.pos < len(p.b) {
		return fail(nil, "text after the object at byte %d: %s (one object a line)", p.pos+1, p.show())
	}
	return nil
}

func (p *parser) peek() byte {
	if p.pos < len(p.b) {
		return p.b[p.pos]
	}
	return 0
}

func (p *parser) eat(c byte) bool {
	if p.pos < len(p.b) && p.b[p.pos] == c {
		p.pos++
		return true
	}
	return false
}

// word consumes w if the line continues with it.
func (p *parser) word(w string) bool {
	if len(p.b)-p.pos >= len(w) && string(p.b[p.pos:p.pos+len(w)]) == w {
		p.pos += len(w)
		return true
	}
	return false
}

// space skips JSON white space (and a CR before the line end).
func (p *parser) space() {
	for p.pos < len(p.b) {
		switch p.b[p.pos] {
		case ' ', '\t', '\r', '\n':
			p.pos++
		default:
			return
		}
	}
}

// show names the byte at the parser's position for a message.
func (p *parser) show() string {
	if p.pos >= len(p.b) {
		return "the line end"
	}
	c := p.b[p.pos]
	if c >= 0x20 && c < 0x7f {
		return strconv.QuoteRune(rune(c))
	}
	return fmt.Sprintf("byte 0x%02x", c)
}

// number consumes a JSON number: -?(0|[1-9][0-9]*)(.[0-9]+)?([eE][+-]?[0-9]+)?
func (p *parser) number() bool {
	p.eat('-')
	switch c := p.peek(); {
	case c == '0':
		p.pos++
	case c >= '1' && c <= '9':
		p.digits()
	default:
		return false
	}
	if p.eat('.') && !p.digits() {
		return false
	}
	if p.eat('e') || p.eat('E') {
		if !p.eat('+') {
			p.eat('-')
		}
		if !p.digits() {
			return false
		}
	}
	// The number must end where a value may: not "1x" or "01".
	switch p.peek() {
	case 0, ' ', '\t', '\r', '\n', ',', '}':
		return true
	}
	return false
}

// digits consumes one or more decimal digits.
func (p *parser) digits() bool {
	start := p.pos
	for p.pos < len(p.b) && p.b[p.pos] >= '0' && p.b[p.pos] <= '9' {
		p.pos++
	}
	return p.pos > start
}

// str consumes a JSON string at the parser's position (its opening quote)
// and returns its bytes: the line's own when it has no escape, otherwise
// unescaped into r.scr.
func (r *Reader) str(p *parser) ([]byte, error) {
	p.pos++ // the opening quote
	start := p.pos
	for p.pos < len(p.b) {
		c := p.b[p.pos]
		if c == '"' {
			p.pos++
			return p.b[start : p.pos-1], nil
		}
		if c == '\\' {
			break
		}
		if c < 0x20 {
			return nil, fmt.Errorf("control byte 0x%02x in a string (escape it)", c)
		}
		p.pos++
	}
	if p.pos >= len(p.b) {
		return nil, fmt.Errorf("the string is not closed on its line")
	}
	out := len(r.scr)
	r.scr = append(r.scr, p.b[start:p.pos]...)
	for p.pos < len(p.b) {
		c := p.b[p.pos]
		switch {
		case c == '"':
			p.pos++
			return r.scr[out:len(r.scr):len(r.scr)], nil
		case c < 0x20:
			return nil, fmt.Errorf("control byte 0x%02x in a string (escape it)", c)
		case c != '\\':
			r.scr = append(r.scr, c)
			p.pos++
			continue
		}
		if p.pos+1 >= len(p.b) {
			break
		}
		e := p.b[p.pos+1]
		p.pos += 2
		switch e {
		case '"', '\\', '/':
			r.scr = append(r.scr, e)
		case 'b':
			r.scr = append(r.scr, '\b')
		case 'f':
			r.scr = append(r.scr, '\f')
		case 'n':
			r.scr = append(r.scr, '\n')
		case 'r':
			r.scr = append(r.scr, '\r')
		case 't':
			r.scr = append(r.scr, '\t')
		case 'u':
			ru, ok := p.hex4()
			if !ok {
				return nil, fmt.Errorf("bad \\u escape at byte %d", p.pos-1)
			}
			if utf16.IsSurrogate(ru) {
				// A pair stands for one rune; a lone half is U+FFFD.
				save := p.pos
				if p.word(`\u`) {
					if lo, ok := p.hex4(); ok {
						if d := utf16.DecodeRune(ru, lo); d != utf8.RuneError {
							r.scr = utf8.AppendRune(r.scr, d)
							continue
						}
					}
				}
				p.pos = save
				ru = utf8.RuneError
			}
			r.scr = utf8.AppendRune(r.scr, ru)
		default:
			return nil, fmt.Errorf("bad escape \\%c at byte %d", e, p.pos-1)
		}
	}
	return nil, fmt.Errorf("the string is not closed on its line")
}

// hex4 consumes four hexadecimal digits.
func (p *parser) hex4() (rune, bool) {
	if len(p.b)-p.pos < 4 {
		return 0, false
	}
	v, err := strconv.ParseUint(string(p.b[p.pos:p.pos+4]), 16, 16)
	if err != nil {
		return 0, false
	}
	p.pos += 4
	return rune(v), true
}
