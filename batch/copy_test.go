package batch

import (
	"fmt"
	"reflect"
	"testing"

	"gaitrig/scenarios"
)

// fill sets every field reachable from v to a value derived from seed:
// every pointer allocated, every slice two long, every map two keys. It
// knows nothing of the scenario's fields, so a field added to the schema
// is covered without a change here.
func fill(v reflect.Value, seed *int) {
	*seed++
	switch v.Kind() {
	case reflect.Pointer:
		v.Set(reflect.New(v.Type().Elem()))
		fill(v.Elem(), seed)
	case reflect.Struct:
		for i := 0; i < v.NumField(); i++ {
			fill(v.Field(i), seed)
		}
	case reflect.Slice:
		v.Set(reflect.MakeSlice(v.Type(), 2, 2))
		for i := 0; i < 2; i++ {
			fill(v.Index(i), seed)
		}
	case reflect.Array:
		for i := 0; i < v.Len(); i++ {
			fill(v.Index(i), seed)
		}
	case reflect.Map:
		v.Set(reflect.MakeMap(v.Type()))
		for i := 0; i < 2; i++ {
			k := reflect.New(v.Type().Key()).Elem()
			fill(k, seed)
			e := reflect.New(v.Type().Elem()).Elem()
			fill(e, seed)
			v.SetMapIndex(k, e)
		}
	case reflect.String:
		v.SetString(fmt.Sprintf("s%d", *seed))
	case reflect.Float64, reflect.Float32:
		v.SetFloat(float64(*seed) + 0.5)
	case reflect.Int, reflect.Int64, reflect.Int32, reflect.Int16, reflect.Int8:
		v.SetInt(int64(*seed))
	case reflect.Uint8:
		v.SetUint(uint64(*seed % 256))
	case reflect.Bool:
		v.SetBool(*seed%2 == 0)
	default:
		panic("fill: " + v.Kind().String())
	}
}

func filled(seed int) *scenarios.Scenario {
	s := new(scenarios.Scenario)
	fill(reflect.ValueOf(s).Elem(), &seed)
	return s
}

// addresses collects the address of every piece of memory reachable
// through a pointer, slice or map of v.
func addresses(v reflect.Value, into map[uintptr]string, path string) {
	switch v.Kind() {
	case reflect.Pointer:
		if !v.IsNil() {
			into[v.Pointer()] = path
			addresses(v.Elem(), into, path)
		}
	case reflect.Struct:
		for i := 0; i < v.NumField(); i++ {
			addresses(v.Field(i), into, path+"."+v.Type().Field(i).Name)
		}
	case reflect.Slice:
		for i := 0; i < v.Len(); i++ {
			into[v.Index(i).Addr().Pointer()] = fmt.Sprintf("%s[%d]", path, i)
			addresses(v.Index(i), into, fmt.Sprintf("%s[%d]", path, i))
		}
	case reflect.Array:
		for i := 0; i < v.Len(); i++ {
			addresses(v.Index(i), into, path)
		}
	case reflect.Map:
		if !v.IsNil() {
			into[v.Pointer()] = path
			it := v.MapRange()
			for it.Next() {
				addresses(it.Value(), into, path+"["+it.Key().String()+"]")
			}
		}
	}
}

func TestCopyIsDeep(t *testing.T) {
	orig := filled(0)
	c := Copy(orig)
	if !reflect.DeepEqual(c, orig) {
		t.Fatal("the copy differs from the original")
	}
	a, b := map[uintptr]string{}, map[uintptr]string{}
	addresses(reflect.ValueOf(orig).Elem(), a, "scenario")
	addresses(reflect.ValueOf(c).Elem(), b, "scenario")
	if len(a) < 20 {
		t.Fatalf("only %d pieces of memory reachable in the filled scenario: fill does not reach the schema", len(a))
	}
	for p, path := range b {
		if o, shared := a[p]; shared {
			t.Errorf("copy shares memory with the original at %s (%s)", path, o)
		}
	}
	// Change every value of the copy: the original must stay as it was.
	seed := 1000
	fill(reflect.ValueOf(c).Elem(), &seed)
	if !reflect.DeepEqual(orig, filled(0)) {
		t.Error("changing the copy changed the original")
	}
	if Copy(nil) != nil {
		t.Error("Copy(nil) is not nil")
	}
}

func TestModifyingAVariantNeverChangesTheBase(t *testing.T) {
	base := filled(0)
	base.Controller.Link = scenarios.LinkBuiltin
	// Derive validates, and a filled scenario is not a valid one: copy
	// and change the way Derive does, on a scenario with every pointer,
	// slice and map set.
	v := Copy(base)
	for _, c := range Battery() {
		if c.Change != nil {
			c.Change(v)
		}
	}
	v.Terrain.Segments[1].MuStatic = -1
	v.Initial.LegAnglesRad[0] = -1
	v.Faults[0].ImpulseNS[0] = -1
	*v.Plant.Legs.Left.LengthM = -1
	v.Controller.Settings["new"] = -1
	v.Alarms["new"] = "trip"
	*v.Pass.NoTrip = !*v.Pass.NoTrip
	v.Text[0] = 'X'
	want := filled(0)
	want.Controller.Link = scenarios.LinkBuiltin
	if !reflect.DeepEqual(base, want) {
		t.Error("changing the variant changed the base")
	}
}
