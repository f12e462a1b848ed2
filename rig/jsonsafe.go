package rig

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"reflect"
	"slices"
	"strings"
)

// JSONSafe returns v as a value encoding/json can always marshal: every
// NaN and ±Inf number in it (in structs, slices, arrays, maps, pointers)
// becomes null, because encoding/json refuses them and figures that were
// not measured or found (a gait the finder missed, a run with no ticks)
// are NaN. Struct fields keep their order and their json tag names; a nil
// slice becomes []. This is the one NaN-safe encoder for what the command
// line and the batch package print or write; run-folder files have their
// own round-trip format (record).
func JSONSafe(v any) any {
	return clean(reflect.ValueOf(v))
}

func clean(v reflect.Value) any {
	switch v.Kind() {
	case reflect.Invalid:
		return nil
	case reflect.Float32, reflect.Float64:
		f := v.Float()
		if math.IsNaN(f) || math.IsInf(f, 0) {
			return nil
		}
		return f
	case reflect.Struct:
		out := map[string]any{}
		t := v.Type()
		for i := 0; i < t.NumField(); i++ {
			name, ok := jsonName(t.Field(i), v.Field(i))
			if ok {
				out[name] = clean(v.Field(i))
			}
		}
		return orderedStruct{t: t, m: out}
	case reflect.Slice, reflect.Array:
		if v.Kind() == reflect.Slice && v.IsNil() {
			return []any{}
		}
		out := make([]any, v.Len())
		for i := range out {
			out[i] = clean(v.Index(i))
		}
		return out
	case reflect.Map:
		if v.IsNil() {
			return nil
		}
		out := make(map[string]any, v.Len())
		it := v.MapRange()
		for it.Next() {
			out[fmt.Sprint(it.Key().Interface())] = clean(it.Value())
		}
		return out
	case reflect.Pointer, reflect.Interface:
		if v.IsNil() {
			return nil
		}
		return clean(v.Elem())
	}
	return v.Interface()
}

// orderedStruct keeps the field order of the struct it came from when
// marshalled, so JSON output reads in a sensible order.
type orderedStruct struct {
	t reflect.Type
	m map[string]any
}

// MarshalJSON writes the fields in the struct's order.
func (o orderedStruct) MarshalJSON() ([]byte, error) {
	buf := []byte{'{'}
	first := true
	for i := 0; i < o.t.NumField(); i++ {
		name, _ := jsonName(o.t.Field(i), reflect.Value{})
		val, ok := o.m[name]
		if !ok {
			continue
		}
		if !first {
			buf = append(buf, ',')
		}
		first = false
		k, _ := marshalRaw(name)
		buf = append(buf, k...)
		buf = append(buf, ':')
		b, err := marshalRaw(val)
		if err != nil {
			return nil, err
		}
		buf = append(buf, b...)
	}
	return append(buf, '}'), nil
}

// marshalRaw is json.Marshal without HTML escaping: the fields are written
// as they are, and the caller's encoder decides (json.Marshal of the whole
// escapes "<", ">" and "&"; an Encoder with SetEscapeHTML(false) keeps
// them, as the command line wants).
func marshalRaw(v any) ([]byte, error) {
	var b bytes.Buffer
	enc := json.NewEncoder(&b)
	enc.SetEscapeHTML(false)
	if err := enc.Encode(v); err != nil {
		return nil, err
	}
	return bytes.TrimSuffix(b.Bytes(), []byte("\n")), nil
}

// jsonName is the key encoding/json gives struct field f, and whether it
// writes the field at all: not when it is unexported, tagged "-", or
// tagged omitempty and empty (v, when valid, is the field's value).
func jsonName(f reflect.StructField, v reflect.Value) (string, bool) {
	if !f.IsExported() {
		return "", false
	}
	tag := f.Tag.Get("json")
	if tag == "-" {
		return "", false
	}
	name, opts, _ := strings.Cut(tag, ",")
	if name == "" {
		name = f.Name
	}
	if v.IsValid() && slices.Contains(strings.Split(opts, ","), "omitempty") && isEmpty(v) {
		return name, false
	}
	return name, true
}

// isEmpty is encoding/json's notion of an empty value for omitempty.
func isEmpty(v reflect.Value) bool {
	switch v.Kind() {
	case reflect.Array, reflect.Map, reflect.Slice, reflect.String:
		return v.Len() == 0
	case reflect.Bool, reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64,
		reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64, reflect.Uintptr,
		reflect.Float32, reflect.Float64, reflect.Interface, reflect.Pointer:
		return v.IsZero()
	}
	return false
}
