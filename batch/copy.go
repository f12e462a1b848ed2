package batch

import (
	"fmt"
	"reflect"

	"gaitrig/scenarios"
)

// Copy returns a deep copy of s: every pointer, slice and map is new, so
// changing the copy never changes s. It copies by reflection over the
// scenario's fields, so a field added to the schema later is copied too
// without a change here. A nil s gives nil.
func Copy(s *scenarios.Scenario) *scenarios.Scenario {
	if s == nil {
		return nil
	}
	out := new(scenarios.Scenario)
	deepCopy(reflect.ValueOf(out).Elem(), reflect.ValueOf(s).Elem(), "scenario")
	return out
}

// deepCopy copies src into dst (both of the same type). The scenario
// schema holds only exported data fields; a kind it cannot copy safely
// (a function, channel, interface or unexported field) is a change of the
// schema this code must learn about, so it panics rather than share
// memory silently.
func deepCopy(dst, src reflect.Value, path string) {
	switch src.Kind() {
	case reflect.Pointer:
		if src.IsNil() {
			return
		}
		p := reflect.New(src.Type().Elem())
		deepCopy(p.Elem(), src.Elem(), path)
		dst.Set(p)
	case reflect.Struct:
		t := src.Type()
		for i := 0; i < t.NumField(); i++ {
			if !t.Field(i).IsExported() {
				panic(fmt.Sprintf("batch: cannot deep-copy unexported field %s.%s", path, t.Field(i).Name))
			}
			deepCopy(dst.Field(i), src.Field(i), path+"."+t.Field(i).Name)
		}
	case reflect.Slice:
		if src.IsNil() {
			return
		}
		s := reflect.MakeSlice(src.Type(), src.Len(), src.Len())
		for i := 0; i < src.Len(); i++ {
			deepCopy(s.Index(i), src.Index(i), path)
		}
		dst.Set(s)
	case reflect.Array:
		for i := 0; i < src.Len(); i++ {
			deepCopy(dst.Index(i), src.Index(i), path)
		}
	case reflect.Map:
		if src.IsNil() {
			return
		}
		m := reflect.MakeMapWithSize(src.Type(), src.Len())
		it := src.MapRange()
		for it.Next() {
			v := reflect.New(src.Type().Elem()).Elem()
			deepCopy(v, it.Value(), path)
			// Keys of the schema's maps are strings: values, never shared.
			m.SetMapIndex(it.Key(), v)
		}
		dst.Set(m)
	case reflect.Bool, reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64,
		reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64,
		reflect.Float32, reflect.Float64, reflect.String:
		dst.Set(src)
	default:
		panic(fmt.Sprintf("batch: cannot deep-copy %s (a %s)", path, src.Kind()))
	}
}
