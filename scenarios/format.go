package scenarios

import (
	"encoding/json"
	"errors"
	"fmt"
	"reflect"
	"regexp"
	"sort"
	"strconv"
	"strings"
)

// Format writes the typed scenario s as scenario YAML that loads back into
// exactly s, between head and tail, which must be YAML comments or blank
// lines (a record's header, the text it was derived from). Parse names the
// text s.File.
//
// The fields are written from the typed scenario, which is what runs; the
// text is only its record. A zero is left out where the loader gives zero
// for a field left out, and written where it does not (a field with a
// non-zero default such as sensors.seed, or a required field), so the text
// loads back into exactly s. Which zeros those are is learnt from the
// loader itself, not from a copy of its rules: the text is loaded, the
// loader's complaints about left-out fields and the fields that came back
// different name the zeros to write, and the text is written again. A text
// that still does not load back into s is an error, never a silently
// different record.
func Format(s *Scenario, head, tail string) ([]byte, error) {
	force := map[string]bool{}
	// Each pass can only add fields to force; a scenario has a few dozen
	// leaves, so a handful of passes is plenty (two or three in practice).
	for pass := 0; pass < 8; pass++ {
		w := textWriter{force: force, omitted: map[string]bool{}}
		body := w.write(reflect.ValueOf(s).Elem())
		text := []byte(head + body + tail)
		got, err := Parse(s.File, text)
		var toForce []string
		if err != nil {
			var se *Error
			if !errors.As(err, &se) {
				return nil, err
			}
			for _, p := range se.Problems {
				toForce = append(toForce, p.Path)
			}
		} else {
			toForce = differences(reflect.ValueOf(s).Elem(), reflect.ValueOf(got).Elem(), "")
			if len(toForce) == 0 {
				return text, nil
			}
		}
		added := false
		for _, p := range toForce {
			if w.omitted[p] && !force[p] {
				force[p] = true
				added = true
			}
		}
		if !added {
			if err != nil {
				return nil, err
			}
			return nil, fmt.Errorf("the text written for the scenario does not load back into it (differs at %s)", strings.Join(toForce, ", "))
		}
	}
	return nil, errors.New("the text written for the scenario does not settle")
}

// ynode is a value to write: a scalar (already in YAML spelling), a
// mapping or a sequence.
type ynode struct {
	scalar string
	isMap  bool
	fields []ykv
	isSeq  bool
	items  []*ynode
}

type ykv struct {
	key string
	val *ynode
}

// textWriter turns a scenario into YAML. Zero scalars are left out unless
// their path is in force; omitted records the paths it left out.
type textWriter struct {
	force   map[string]bool
	omitted map[string]bool
}

func (w *textWriter) write(v reflect.Value) string {
	n := w.node(v, "")
	var b strings.Builder
	if n != nil {
		emitMap(&b, n.fields, 0)
	}
	return b.String()
}

// node builds the value at path; nil means "leave the field out".
func (w *textWriter) node(v reflect.Value, path string) *ynode {
	switch v.Kind() {
	case reflect.Pointer:
		if v.IsNil() {
			return nil
		}
		// A pointer that is set means "given", whatever it points to.
		n := w.node(v.Elem(), path)
		if n == nil {
			if v.Elem().Kind() == reflect.Struct {
				return &ynode{isMap: true}
			}
			return scalarNode(v.Elem())
		}
		return n
	case reflect.Struct:
		n := &ynode{isMap: true}
		for _, f := range yamlFields(v.Type()) {
			if c := w.node(v.FieldByIndex(f.index), join(path, f.name)); c != nil {
				n.fields = append(n.fields, ykv{f.name, c})
			}
		}
		if len(n.fields) == 0 {
			return nil
		}
		return n
	case reflect.Array:
		if v.IsZero() && !w.force[path] {
			w.omitted[path] = true
			return nil
		}
		return w.seq(v, path)
	case reflect.Slice:
		if v.Len() == 0 {
			return nil
		}
		return w.seq(v, path)
	case reflect.Map:
		if v.Len() == 0 {
			return nil
		}
		n := &ynode{isMap: true}
		keys := v.MapKeys()
		sort.Slice(keys, func(i, j int) bool { return keys[i].String() < keys[j].String() })
		for _, k := range keys {
			e := v.MapIndex(k)
			c := w.node(e, join(path, k.String()))
			if c == nil {
				c = scalarNode(e) // a key that is there is written, zero or not
			}
			n.fields = append(n.fields, ykv{mapKey(k.String()), c})
		}
		return n
	default:
		if v.IsZero() && !w.force[path] {
			w.omitted[path] = true
			return nil
		}
		return scalarNode(v)
	}
}

// seq writes every element: in a list the position is the meaning, so a
// zero element is never left out.
func (w *textWriter) seq(v reflect.Value, path string) *ynode {
	n := &ynode{isSeq: true}
	for i := 0; i < v.Len(); i++ {
		e := v.Index(i)
		c := w.node(e, fmt.Sprintf("%s[%d]", path, i))
		if c == nil {
			if e.Kind() == reflect.Struct || (e.Kind() == reflect.Pointer && !e.IsNil()) {
				c = &ynode{isMap: true}
			} else {
				c = scalarNode(e)
			}
		}
		n.items = append(n.items, c)
	}
	return n
}

func scalarNode(v reflect.Value) *ynode {
	switch v.Kind() {
	case reflect.String:
		b, _ := json.Marshal(v.String()) // a JSON string is a valid double-quoted YAML scalar
		return &ynode{scalar: string(b)}
	case reflect.Float32, reflect.Float64:
		// Plain decimals, shortest form that reads back to the same bits;
		// never exponent notation.
		return &ynode{scalar: strconv.FormatFloat(v.Float(), 'f', -1, 64)}
	case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64:
		return &ynode{scalar: strconv.FormatInt(v.Int(), 10)}
	case reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64:
		return &ynode{scalar: strconv.FormatUint(v.Uint(), 10)}
	case reflect.Bool:
		return &ynode{scalar: strconv.FormatBool(v.Bool())}
	case reflect.Pointer:
		if v.IsNil() {
			return &ynode{scalar: "null"}
		}
		return scalarNode(v.Elem())
	}
	return &ynode{scalar: "null"}
}

var plainKey = regexp.MustCompile(`^[A-Za-z_][A-Za-z0-9_.-]*$`)

func mapKey(k string) string {
	if plainKey.MatchString(k) {
		return k
	}
	b, _ := json.Marshal(k)
	return string(b)
}

func emitMap(b *strings.Builder, fields []ykv, indent int) {
	pad := strings.Repeat(" ", indent)
	for _, f := range fields {
		b.WriteString(pad)
		b.WriteString(f.key)
		b.WriteByte(':')
		emitValue(b, f.val, indent)
	}
}

// emitValue writes what follows "key:" or "-".
func emitValue(b *strings.Builder, n *ynode, indent int) {
	switch {
	case n.isMap && len(n.fields) == 0:
		b.WriteString(" {}\n")
	case n.isMap:
		b.WriteByte('\n')
		emitMap(b, n.fields, indent+2)
	case n.isSeq && allScalar(n.items):
		parts := make([]string, len(n.items))
		for i, it := range n.items {
			parts[i] = it.scalar
		}
		b.WriteString(" [" + strings.Join(parts, ", ") + "]\n")
	case n.isSeq:
		b.WriteByte('\n')
		pad := strings.Repeat(" ", indent+2)
		for _, it := range n.items {
			if it.isMap && len(it.fields) > 0 {
				var sub strings.Builder
				emitMap(&sub, it.fields, indent+4)
				b.WriteString(pad + "- " + strings.TrimPrefix(sub.String(), pad+"  "))
				continue
			}
			b.WriteString(pad + "-")
			emitValue(b, it, indent+2)
		}
	default:
		b.WriteString(" " + n.scalar + "\n")
	}
}

func allScalar(items []*ynode) bool {
	for _, it := range items {
		if it.isMap || it.isSeq {
			return false
		}
	}
	return true
}

// Differences lists the field paths (as the loader spells them in its
// errors: plant.legs.length_m, faults[0].kind) at which scenarios a and b
// differ, in schema order. A nil and an empty list or map are the same;
// floats compare by value; File and Text, which are not fields of the
// file, are not compared. A list of scalars or a map that differs is
// named as a whole.
func Differences(a, b *Scenario) []string {
	return differences(reflect.ValueOf(a).Elem(), reflect.ValueOf(b).Elem(), "")
}

// differences lists the paths (loader spelling) at which a and b differ.
// A nil and an empty slice or map are the same; floats compare by value.
func differences(a, b reflect.Value, path string) []string {
	switch a.Kind() {
	case reflect.Pointer:
		if a.IsNil() || b.IsNil() {
			if a.IsNil() != b.IsNil() {
				return []string{path}
			}
			return nil
		}
		return differences(a.Elem(), b.Elem(), path)
	case reflect.Struct:
		var out []string
		for _, f := range yamlFields(a.Type()) {
			out = append(out, differences(a.FieldByIndex(f.index), b.FieldByIndex(f.index), join(path, f.name))...)
		}
		return out
	case reflect.Slice, reflect.Array:
		if a.Len() != b.Len() {
			return []string{path}
		}
		if a.Kind() == reflect.Array || isScalarKind(a.Type().Elem().Kind()) {
			for i := 0; i < a.Len(); i++ {
				if len(differences(a.Index(i), b.Index(i), path)) > 0 {
					return []string{path}
				}
			}
			return nil
		}
		var out []string
		for i := 0; i < a.Len(); i++ {
			out = append(out, differences(a.Index(i), b.Index(i), fmt.Sprintf("%s[%d]", path, i))...)
		}
		return out
	case reflect.Map:
		if a.Len() != b.Len() {
			return []string{path}
		}
		it := a.MapRange()
		for it.Next() {
			e := b.MapIndex(it.Key())
			if !e.IsValid() || len(differences(it.Value(), e, path)) > 0 {
				return []string{path}
			}
		}
		return nil
	case reflect.Float32, reflect.Float64:
		if a.Float() != b.Float() {
			return []string{path}
		}
		return nil
	default:
		if !a.Equal(b) {
			return []string{path}
		}
		return nil
	}
}

func isScalarKind(k reflect.Kind) bool {
	switch k {
	case reflect.Struct, reflect.Pointer, reflect.Slice, reflect.Array, reflect.Map:
		return false
	}
	return true
}
