// Package strictjson decodes JSON that must hold exactly the fields of a
// struct: every field whose tag does not say omitempty present and not
// null, no field the struct does not have, and nothing after the object.
// Mapping-table manifests are read this way, so that a manifest of another
// layout is refused by name rather than half read.
package strictjson

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"reflect"
	"strings"
)

// Decode decodes the JSON object data into v, a pointer to a struct.
// Errors name the field (prior, columns[0].table).
func Decode(data []byte, v any) error {
	t := reflect.TypeOf(v)
	if t.Kind() != reflect.Pointer || t.Elem().Kind() != reflect.Struct {
		return errors.New("strictjson: v must point to a struct")
	}
	if len(bytes.TrimSpace(data)) == 0 {
		data = []byte("{}")
	}
	if err := requireFields(data, t.Elem(), ""); err != nil {
		return err
	}
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		return err
	}
	if _, err := dec.Token(); err != io.EOF {
		return errors.New("more data after the object")
	}
	return nil
}

// requireFields checks that the JSON object data has every field of the
// struct type t whose tag does not say omitempty, not null, and so on down
// the nested structs and slices of structs; at names the object in errors.
func requireFields(data []byte, t reflect.Type, at string) error {
	var obj map[string]json.RawMessage
	if err := json.Unmarshal(data, &obj); err != nil {
		return fmt.Errorf("%s: %v", orTop(at), err)
	}
	if obj == nil {
		return fmt.Errorf("%s is null", orTop(at))
	}
	for i := 0; i < t.NumField(); i++ {
		f := t.Field(i)
		name, opts, _ := strings.Cut(f.Tag.Get("json"), ",")
		if name == "" || name == "-" {
			continue
		}
		path := name
		if at != "" {
			path = at + "." + name
		}
		raw, ok := obj[name]
		if !ok || string(raw) == "null" {
			if strings.Contains(opts, "omitempty") {
				continue
			}
			return fmt.Errorf("%s is missing", path)
		}
		ft := f.Type
		switch {
		case ft.Kind() == reflect.Struct:
			if err := requireFields(raw, ft, path); err != nil {
				return err
			}
		case ft.Kind() == reflect.Slice && ft.Elem().Kind() == reflect.Struct:
			var elems []json.RawMessage
			if err := json.Unmarshal(raw, &elems); err != nil {
				return fmt.Errorf("%s: %v", path, err)
			}
			for j, e := range elems {
				if err := requireFields(e, ft.Elem(), fmt.Sprintf("%s[%d]", path, j)); err != nil {
					return err
				}
			}
		}
	}
	return nil
}

func orTop(at string) string {
	if at == "" {
		return "the object"
	}
	return at
}
