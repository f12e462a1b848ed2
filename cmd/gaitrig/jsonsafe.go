package main

import (
	"encoding/json"
	"math"
	"reflect"
)

// jsonSafe returns v as a generic JSON value in which NaN and ±Inf numbers
// become null, because encoding/json refuses them and a gait that was not
// found has NaN fields.
func jsonSafe(v any) any {
	return clean(reflect.ValueOf(v))
}

func clean(v reflect.Value) any {
	switch v.Kind() {
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
			f := t.Field(i)
			if !f.IsExported() {
				continue
			}
			name := f.Name
			if tag := f.Tag.Get("json"); tag != "" {
				if tag == "-" {
					continue
				}
				name = tag
				for j := 0; j < len(tag); j++ {
					if tag[j] == ',' {
						name = tag[:j]
						break
					}
				}
			}
			out[name] = clean(v.Field(i))
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

func (o orderedStruct) MarshalJSON() ([]byte, error) {
	buf := []byte{'{'}
	first := true
	for i := 0; i < o.t.NumField(); i++ {
		f := o.t.Field(i)
		name := f.Name
		if tag := f.Tag.Get("json"); tag != "" {
			name = tag
			for j := 0; j < len(tag); j++ {
				if tag[j] == ',' {
					name = tag[:j]
					break
				}
			}
		}
		val, ok := o.m[name]
		if !ok {
			continue
		}
		if !first {
			buf = append(buf, ',')
		}
		first = false
		k, _ := json.Marshal(name)
		buf = append(buf, k...)
		buf = append(buf, ':')
		b, err := json.Marshal(val)
		if err != nil {
			return nil, err
		}
		buf = append(buf, b...)
	}
	return append(buf, '}'), nil
}
