package pqio

import (
	"encoding/binary"
	"errors"
)

// errThrift: a footer that is not well-formed compact thrift, or whose
// lists, sets or maps declare more elements than its bytes can hold.
var errThrift = errors.New("malformed footer")

// maxThriftDepth bounds the nesting of a footer's structs and lists.
const maxThriftDepth = 64

// checkThrift walks the compact thrift struct in b without decoding it
// into values, and fails unless it is well formed, ends within b, and
// each of its lists, sets and maps declares no more elements than the
// bytes left could hold (each takes at least one byte). The decoder makes
// a list of the declared size before reading its elements, so a few bytes
// could otherwise ask for gigabytes (layout from the thrift compact
// protocol's specification).
//
// A struct element may take a single byte (an empty struct) and yet be
// decoded into hundreds of bytes (a column chunk's metadata is 560), so
// the elements of every list also draw on a budget of what the decoder may
// allocate: thriftBudget plus 64 bytes per footer byte.
func checkThrift(b []byte) error {
	w := thriftWalk{b: b, budget: thriftBudget + 64*int64(len(b))}
	return w.value(12, 0) // a struct
}

// thriftBudget is the allocation a footer may cause beyond 64 bytes per
// byte of its own, and structElemBytes what one element of a list of
// structs is reckoned to take once decoded (the largest struct of the
// footer, a column chunk with its metadata, rounded up).
const (
	thriftBudget    = 64 << 20
	structElemBytes = 640
	otherElemBytes  = 24 // a slice or string header
)

// thriftWalk is a position in compact thrift bytes.
type thriftWalk struct {
	b      []byte
	i      int
	budget int64 // bytes the decoder may still allocate for lists
}

func (w *thriftWalk) byte() (byte, error) {
	if w.i >= len(w.b) {
		return 0, errThrift
	}
	w.i++
	return w.b[w.i-1], nil
}

func (w *thriftWalk) uvarint() (uint64, error) {
	v, n := binary.Uvarint(w.b[w.i:])
	if n <= 0 {
		return 0, errThrift
	}
	w.i += n
	return v, nil
}

func (w *thriftWalk) skip(n uint64) error {
	if n > uint64(len(w.b)-w.i) {
		return errThrift
	}
	w.i += int(n)
	return nil
}

// count reads nothing; it checks that n elements can fit in what is left.
func (w *thriftWalk) count(n uint64) error {
	if n > uint64(len(w.b)-w.i) {
		return errThrift
	}
	return nil
}

// value walks one value of compact type t.
func (w *thriftWalk) value(t byte, depth int) error {
	if depth > maxThriftDepth {
		return errThrift
	}
	switch t {
	case 1, 2: // booleans: in the field header, or a byte in a list
		return nil
	case 3: // byte
		return w.skip(1)
	case 4, 5, 6: // i16, i32, i64: zigzag varints
		_, err := w.uvarint()
		return err
	case 7: // double
		return w.skip(8)
	case 8: // binary
		n, err := w.uvarint()
		if err != nil {
			return err
		}
		return w.skip(n)
	case 9, 10: // list, set
		h, err := w.byte()
		if err != nil {
			return err
		}
		n := uint64(h >> 4)
		if n == 15 {
			if n, err = w.uvarint(); err != nil {
				return err
			}
		}
		if err := w.count(n); err != nil {
			return err
		}
		et := h & 15
		size := int64(otherElemBytes)
		if et == 12 {
			size = structElemBytes
		}
		if w.budget -= int64(n) * size; w.budget < 0 {
			return errThrift
		}
		for range n {
			if et == 1 || et == 2 {
				err = w.skip(1) // a boolean element takes a byte
			} else {
				err = w.value(et, depth+1)
			}
			if err != nil {
				return err
			}
		}
		return nil
	case 11: // map
		n, err := w.uvarint()
		if err != nil || n == 0 {
			return err
		}
		if err := w.count(n); err != nil {
			return err
		}
		kv, err := w.byte()
		if err != nil {
			return err
		}
		for range n {
			for _, et := range []byte{kv >> 4, kv & 15} {
				if et == 1 || et == 2 {
					err = w.skip(1)
				} else {
					err = w.value(et, depth+1)
				}
				if err != nil {
					return err
				}
			}
		}
		return nil
	case 12: // struct: fields up to a stop byte
		for {
			h, err := w.byte()
			if err != nil {
				return err
			}
			if h == 0 {
				return nil
			}
			if h>>4 == 0 { // the field id follows, in full
				if _, err := w.uvarint(); err != nil {
					return err
				}
			}
			if err := w.value(h&15, depth+1); err != nil {
				return err
			}
		}
	}
	return errThrift
}
