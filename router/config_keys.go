package router

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"reflect"
	"strconv"
	"strings"

	"github.com/hopwise/hopwise/internal/jsonkeys"
)

// checkConfigJSON checks a config document before it is decoded: one JSON
// object whose fields, at every level (the arms too), are given at most
// once and spelt exactly (encoding/json would match "Beam" to beam and keep
// the last of two), and whose values have the fields' kinds and fit them.
// Unknown fields are left to the decoder, which names renamed ones. The
// error names the field by its path ("arms[1].weight") and no Go type.
// O(len(b)).
func checkConfigJSON(b []byte) error {
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.UseNumber()
	tok, err := dec.Token()
	switch {
	case err == io.EOF:
		return errors.New("empty file, want a JSON object")
	case err != nil:
		return jsonkeys.Syntax(err)
	case tok != json.Delim('{'):
		return fmt.Errorf("want a JSON object, got %s", jsonkeys.Kind(tok))
	}
	return checkObject(dec, reflect.TypeFor[Config](), "")
}

// checkObject checks the fields of an object whose '{' was read, against
// the JSON fields of struct t; prefix is the object's path with a dot.
func checkObject(dec *json.Decoder, t reflect.Type, prefix string) error {
	fields := map[string]reflect.Type{}
	var names []string
	for i := range t.NumField() {
		f := t.Field(i)
		if tag, _, _ := strings.Cut(f.Tag.Get("json"), ","); tag != "" && tag != "-" {
			fields[tag] = f.Type
			names = append(names, tag)
		}
	}
	seen := map[string]bool{}
	for dec.More() {
		tok, err := dec.Token()
		if err != nil {
			return jsonkeys.Syntax(err)
		}
		key, _ := tok.(string)
		ft := fields[key]
		if _, caseOf := jsonkeys.Match(key, names); caseOf != "" {
			return fmt.Errorf("field %q differs from %q only in case", prefix+key, caseOf)
		}
		if seen[key] {
			return fmt.Errorf("field %q appears twice", prefix+key)
		}
		seen[key] = true
		if err := checkValue(dec, ft, prefix+key); err != nil {
			return err
		}
	}
	_, err := dec.Token() // '}'
	if err != nil {
		return jsonkeys.Syntax(err)
	}
	return nil
}

// checkValue reads one value of a field of type t (nil: unknown field, any
// value) at path name.
func checkValue(dec *json.Decoder, t reflect.Type, name string) error {
	tok, err := dec.Token()
	if err != nil {
		return jsonkeys.Syntax(err)
	}
	if d, ok := tok.(json.Delim); ok {
		switch {
		case d == '{' && t != nil && t.Kind() == reflect.Struct:
			return checkObject(dec, t, name+".")
		case d == '[' && t != nil && t.Kind() == reflect.Slice:
			for i := 0; dec.More(); i++ {
				if err := checkValue(dec, t.Elem(), fmt.Sprintf("%s[%d]", name, i)); err != nil {
					return err
				}
			}
			_, err := dec.Token() // ']'
			if err != nil {
				return jsonkeys.Syntax(err)
			}
			return nil
		case t != nil:
			return fmt.Errorf("field %q: want %s, got %s", name, kindWant(t), jsonkeys.Kind(tok))
		}
		return skipValue(dec) // an unknown field's object or array
	}
	if t == nil || tok == nil {
		return nil // unknown field (the decoder names it), or null (keeps the default)
	}
	n, isNum := tok.(json.Number)
	switch t.Kind() {
	case reflect.Int:
		if !isNum {
			break
		}
		if _, err := strconv.ParseInt(string(n), 10, 0); err != nil {
			if errors.Is(err, strconv.ErrRange) {
				return fmt.Errorf("field %q: %s is out of range", name, n)
			}
			return fmt.Errorf("field %q: want a whole number, got %s", name, n)
		}
		return nil
	case reflect.Float64:
		if !isNum {
			break
		}
		if _, err := strconv.ParseFloat(string(n), 64); err != nil {
			return fmt.Errorf("field %q: %s is out of range", name, n)
		}
		return nil
	case reflect.String:
		if _, ok := tok.(string); ok {
			return nil
		}
	case reflect.Bool:
		if _, ok := tok.(bool); ok {
			return nil
		}
	default:
		return nil // a kind this walk does not know: the decoder checks it
	}
	return fmt.Errorf("field %q: want %s, got %s", name, kindWant(t), jsonkeys.Kind(tok))
}

// skipValue skips the rest of an object or array whose opening delimiter
// was read.
func skipValue(dec *json.Decoder) error {
	for depth := 1; depth > 0; {
		tok, err := dec.Token()
		if err != nil {
			return jsonkeys.Syntax(err)
		}
		switch tok {
		case json.Delim('{'), json.Delim('['):
			depth++
		case json.Delim('}'), json.Delim(']'):
			depth--
		}
	}
	return nil
}

// kindWant names what a field of type t takes.
func kindWant(t reflect.Type) string {
	switch t.Kind() {
	case reflect.Int:
		return "a whole number"
	case reflect.Float64:
		return "a number"
	case reflect.String:
		return "a string"
	case reflect.Bool:
		return "true or false"
	case reflect.Slice:
		return "an array"
	case reflect.Struct:
		return "an object"
	}
	return "a value of another kind"
}
