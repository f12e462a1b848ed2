package scenarios

import (
	"fmt"
	"math"
	"reflect"
	"regexp"
	"sort"
	"strconv"
	"strings"

	"github.com/goccy/go-yaml/ast"
	"github.com/goccy/go-yaml/parser"
	"github.com/goccy/go-yaml/token"
)

// pos is a place in the source file.
type pos struct{ line, col int }

// decoder turns a YAML syntax tree into a Scenario with reflection, checking
// every key and type itself, so it can report all problems with their lines
// at once (a stock decoder stops at the first) and word them for people who
// write scenarios rather than parsers.
type decoder struct {
	file     string
	problems []Problem
	present  map[string]pos  // field path → position of its key or entry
	bad      map[string]bool // paths whose value could not be decoded
	anchors  map[string]ast.Node
	depth    int // nesting depth of value, bounded by MaxNesting against alias cycles
}

func newDecoder(file string) *decoder {
	return &decoder{file: file, present: map[string]pos{}, bad: map[string]bool{}, anchors: map[string]ast.Node{}}
}

func (d *decoder) add(p pos, path, format string, a ...any) {
	d.problems = append(d.problems, Problem{File: d.file, Line: p.line, Column: p.col, Path: path, Msg: fmt.Sprintf(format, a...)})
}

func nodePos(n ast.Node) pos {
	if n == nil {
		return pos{}
	}
	t := n.GetToken()
	if t == nil || t.Position == nil {
		return pos{}
	}
	return pos{t.Position.Line, t.Position.Column}
}

// parseYAML parses text and decodes its single document into s.
func (d *decoder) parseYAML(text []byte, s *Scenario) {
	f, err := parser.ParseBytes(text, 0)
	if err != nil {
		p := pos{}
		msg := err.Error()
		if se, ok := err.(interface {
			GetToken() *token.Token
			GetMessage() string
		}); ok {
			if t := se.GetToken(); t != nil && t.Position != nil {
				p = pos{t.Position.Line, t.Position.Column}
			}
			msg = se.GetMessage()
		}
		d.add(p, "", "YAML syntax error: %s", msg)
		return
	}
	var body ast.Node
	docs := 0
	for _, doc := range f.Docs {
		if doc == nil || doc.Body == nil {
			continue
		}
		if _, ok := doc.Body.(*ast.CommentGroupNode); ok {
			continue
		}
		docs++
		if docs == 1 {
			body = doc.Body
		} else {
			d.add(nodePos(doc.Body), "", "the file holds more than one YAML document; a scenario file holds exactly one")
			return
		}
	}
	if body == nil {
		d.add(pos{1, 1}, "", "the file is empty; a scenario needs at least name, plant, terrain, initial, controller and run")
		return
	}
	d.value(body, reflect.ValueOf(s).Elem(), "")
}

// unwrap removes tags and anchors and resolves aliases.
func (d *decoder) unwrap(n ast.Node) ast.Node {
	for i := 0; i < 32; i++ {
		switch t := n.(type) {
		case *ast.TagNode:
			n = t.Value
		case *ast.AnchorNode:
			if t.Name != nil {
				d.anchors[t.Name.GetToken().Value] = t.Value
			}
			n = t.Value
		case *ast.AliasNode:
			name := ""
			if t.Value != nil {
				name = t.Value.GetToken().Value
			}
			target, ok := d.anchors[name]
			if !ok {
				return t
			}
			n = target
		default:
			return n
		}
	}
	return n
}

func join(path, key string) string {
	if path == "" {
		return key
	}
	return path + "." + key
}

// kindWord names a YAML node kind for messages.
func kindWord(n ast.Node) string {
	switch t := n.(type) {
	case *ast.NullNode:
		return "nothing (null)"
	case *ast.MappingNode, *ast.MappingValueNode:
		return "a block of fields"
	case *ast.SequenceNode:
		return "a list"
	case *ast.BoolNode:
		return "true/false"
	case *ast.IntegerNode, *ast.FloatNode, *ast.InfinityNode, *ast.NanNode:
		return "the number " + t.GetToken().Value
	case *ast.StringNode, *ast.LiteralNode:
		return "the text " + clip(t.GetToken().Value)
	}
	return "a " + n.Type().String()
}

// clipRunes is how much of a text value a message quotes: enough to
// recognise it, never a whole file read the wrong way.
const clipRunes = 60

// clip quotes s for a message, cut to clipRunes characters.
func clip(s string) string {
	r := []rune(s)
	if len(r) <= clipRunes {
		return strconv.Quote(s)
	}
	return strconv.Quote(string(r[:clipRunes])) + fmt.Sprintf("… (%d characters)", len(r))
}

// pairs returns the key/value pairs of a mapping node, or ok = false.
func pairs(n ast.Node) ([]*ast.MappingValueNode, bool) {
	switch t := n.(type) {
	case *ast.MappingNode:
		return t.Values, true
	case *ast.MappingValueNode:
		return []*ast.MappingValueNode{t}, true
	}
	return nil, false
}

func (d *decoder) value(n ast.Node, v reflect.Value, path string) {
	d.depth++
	defer func() { d.depth-- }()
	// The text was checked against MaxNesting before parsing; aliases can
	// still nest deeper (one that refers to itself never ends).
	if d.depth > MaxNesting {
		d.add(nodePos(n), path, "nested too deeply (an alias that refers to itself?)")
		d.bad[path] = true
		return
	}
	n = d.unwrap(n)
	if a, ok := n.(*ast.AliasNode); ok {
		name := ""
		if a.Value != nil {
			name = a.Value.GetToken().Value
		}
		d.add(nodePos(n), path, "alias *%s refers to no anchor defined before it; define it with &%s on an earlier value", name, name)
		d.bad[path] = true
		return
	}
	if _, ok := n.(*ast.NullNode); ok {
		// An empty value ("torso:" with nothing after it) means the field
		// was left out: required-field checks catch it.
		delete(d.present, path)
		return
	}
	switch v.Kind() {
	case reflect.Pointer:
		e := reflect.New(v.Type().Elem())
		d.value(n, e.Elem(), path)
		v.Set(e)
	case reflect.Struct:
		d.structure(n, v, path)
	case reflect.Float64:
		d.float(n, v, path)
	case reflect.Int, reflect.Int64:
		d.integer(n, v, path)
	case reflect.Bool:
		b, ok := n.(*ast.BoolNode)
		if !ok {
			d.add(nodePos(n), path, "expected true or false, got %s", kindWord(n))
			d.bad[path] = true
			return
		}
		v.SetBool(b.Value)
	case reflect.String:
		switch t := n.(type) {
		case *ast.LiteralNode:
			if t.Value != nil {
				v.SetString(t.Value.Value)
			}
		case *ast.StringNode:
			v.SetString(t.Value)
		case *ast.IntegerNode, *ast.FloatNode:
			v.SetString(n.GetToken().Value)
		default:
			d.add(nodePos(n), path, "expected text, got %s", kindWord(n))
			d.bad[path] = true
		}
	case reflect.Slice, reflect.Array:
		seq, ok := n.(*ast.SequenceNode)
		if !ok {
			example := "such as [0.1, -0.1]"
			if v.Type().Elem().Kind() == reflect.Struct {
				example = "of blocks, each entry starting with '- '"
			}
			d.add(nodePos(n), path, "expected a list %s, got %s", example, kindWord(n))
			d.bad[path] = true
			return
		}
		if v.Kind() == reflect.Array && len(seq.Values) != v.Len() {
			d.add(nodePos(n), path, "expected a list of exactly %d numbers, got %d", v.Len(), len(seq.Values))
			d.bad[path] = true
			return
		}
		if v.Kind() == reflect.Slice {
			v.Set(reflect.MakeSlice(v.Type(), len(seq.Values), len(seq.Values)))
		}
		for i, e := range seq.Values {
			p := fmt.Sprintf("%s[%d]", path, i)
			d.present[p] = nodePos(e)
			d.value(e, v.Index(i), p)
		}
	case reflect.Map:
		ps, ok := pairs(n)
		if !ok {
			d.add(nodePos(n), path, "expected a block of name: value lines, got %s", kindWord(n))
			d.bad[path] = true
			return
		}
		v.Set(reflect.MakeMap(v.Type()))
		for _, mv := range ps {
			key := mv.Key.GetToken().Value
			p := join(path, key)
			if _, dup := d.present[p]; dup {
				d.add(nodePos(mv.Key), p, "given twice (first on line %d)", d.present[p].line)
				continue
			}
			d.present[p] = nodePos(mv.Key)
			e := reflect.New(v.Type().Elem()).Elem()
			d.value(mv.Value, e, p)
			v.SetMapIndex(reflect.ValueOf(key).Convert(v.Type().Key()), e)
		}
	default:
		// Only a change to the schema types can get here, never input.
		d.add(nodePos(n), path, "internal error: the loader cannot decode a %s", v.Type())
		d.bad[path] = true
	}
}

// field is one YAML field of a struct, with inline structs flattened.
type field struct {
	name  string
	index []int
}

func yamlFields(t reflect.Type) []field {
	var out []field
	for i := 0; i < t.NumField(); i++ {
		sf := t.Field(i)
		tag := sf.Tag.Get("yaml")
		if tag == "-" || !sf.IsExported() {
			continue
		}
		name, opts, _ := strings.Cut(tag, ",")
		if opts == "inline" {
			for _, f := range yamlFields(sf.Type) {
				out = append(out, field{f.name, append([]int{i}, f.index...)})
			}
			continue
		}
		out = append(out, field{name, []int{i}})
	}
	return out
}

// secretKeys are keys that would put a secret in the file.
var secretKeys = map[string]string{
	"password": "password_env",
	"passwd":   "password_env",
	"secret":   "password_env",
	"token":    "password_env",
	"username": "username_env",
	"user":     "username_env",
}

func (d *decoder) structure(n ast.Node, v reflect.Value, path string) {
	ps, ok := pairs(n)
	if !ok {
		d.add(nodePos(n), path, "expected a block of fields, got %s", kindWord(n))
		d.bad[path] = true
		return
	}
	fields := yamlFields(v.Type())
	for _, mv := range ps {
		if _, ok := mv.Key.(*ast.MergeKeyNode); ok {
			d.add(nodePos(mv.Key), path, "merge keys (<<) are not supported; write the fields out")
			continue
		}
		key := mv.Key.GetToken().Value
		p := join(path, key)
		kp := nodePos(mv.Key)
		if first, dup := d.present[p]; dup {
			d.add(kp, p, "given twice (first on line %d)", first.line)
			continue
		}
		var f *field
		for i := range fields {
			if fields[i].name == key {
				f = &fields[i]
				break
			}
		}
		if f == nil {
			if env, ok := secretKeys[key]; ok && path == "controller" {
				d.add(kp, p, "secrets never go in a scenario file: it is shared, hashed and copied into every run record; put the value in an environment variable and name that variable with %s", env)
			} else {
				d.add(kp, p, "unknown field %q%s; allowed here: %s", key, suggest(key, fields), names(fields))
			}
			continue
		}
		d.present[p] = kp
		d.value(mv.Value, v.FieldByIndex(f.index), p)
	}
}

func names(fs []field) string {
	s := make([]string, len(fs))
	for i, f := range fs {
		s[i] = f.name
	}
	return strings.Join(s, ", ")
}

// suggest proposes the closest allowed name for a misspelt or unit-less key.
func suggest(key string, fs []field) string {
	best, bestD := "", 1<<30
	for _, f := range fs {
		if strings.HasPrefix(f.name, key+"_") {
			return fmt.Sprintf(" (did you mean %s? units are part of field names)", f.name)
		}
		if dd := editDistance(key, f.name); dd < bestD {
			best, bestD = f.name, dd
		}
	}
	if bestD <= 2 || (bestD <= 3 && len(key) > 8) {
		return fmt.Sprintf(" (did you mean %s?)", best)
	}
	return ""
}

func editDistance(a, b string) int {
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			c := prev[j-1]
			if a[i-1] != b[j-1] {
				c++
			}
			cur[j] = min(c, prev[j]+1, cur[j-1]+1)
		}
		prev, cur = cur, prev
	}
	return prev[len(b)]
}

// unitSuffixes maps a field-name suffix to the unit it stands for; longest
// suffixes first.
var unitSuffixes = []struct{ suffix, unit string }{
	{"_kgm2", "kg·m²"}, {"_mps2", "m/s²"}, {"_radps", "rad/s"}, {"_mps", "m/s"},
	{"_rad", "rad"}, {"_kg", "kg"}, {"_ms", "ms"}, {"_us", "µs"}, {"_ns", "N·s"},
	{"_nm", "N·m"}, {"_n", "N"}, {"_s", "s"}, {"_m", "m"},
}

// unitOf returns the unit a field path's last name carries, or "".
func unitOf(path string) string {
	name := path
	if i := strings.LastIndexAny(name, ".["); i >= 0 {
		name = name[i+1:]
	}
	if strings.HasSuffix(path, "]") {
		// a list element takes the unit of its list
		base := path[:strings.LastIndex(path, "[")]
		return unitOf(base)
	}
	for _, u := range unitSuffixes {
		if strings.HasSuffix(name, u.suffix) {
			return u.unit
		}
	}
	return ""
}

var numberWithUnit = regexp.MustCompile(`^\s*[-+]?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?\s*[^\d\s.].*$`)

// exponentNumber matches a number in exponent notation without a decimal
// point (1e-9, -1e-2, 5E3). YAML 1.2 reads it as a number, but the parser
// follows YAML 1.1 here and reads it as text.
var exponentNumber = regexp.MustCompile(`^[-+]?(\d+\.?\d*|\.\d+)[eE][-+]?\d+$`)

// plainExponent reads an unquoted text node that is a number in exponent
// notation. ok is false for anything else; err says why a number in that
// notation cannot be used (it overflows, or a non-zero value underflows to
// zero).
func plainExponent(n ast.Node) (f float64, ok bool, err error) {
	s, isStr := n.(*ast.StringNode)
	if !isStr || s.GetToken().Type != token.StringType || !exponentNumber.MatchString(s.Value) {
		return 0, false, nil
	}
	f, perr := strconv.ParseFloat(s.Value, 64)
	mantissa, _, _ := strings.Cut(strings.ToLower(s.Value), "e")
	switch {
	case perr != nil || math.IsInf(f, 0):
		return 0, true, fmt.Errorf("%s is too large: it overflows a 64-bit number (largest about 1.8e308)", s.Value)
	case f == 0 && strings.ContainsAny(mantissa, "123456789"):
		return 0, true, fmt.Errorf("%s is too small: it underflows to 0 (smallest about 4.9e-324)", s.Value)
	}
	return f, true, nil
}

func (d *decoder) notNumber(n ast.Node, path string) {
	d.bad[path] = true
	unit := unitOf(path)
	if s, ok := n.(*ast.StringNode); ok {
		txt := s.Value
		if _, err := strconv.ParseFloat(strings.TrimSpace(txt), 64); err == nil {
			d.add(nodePos(n), path, "%s is quoted text; write the number without quotes", clip(txt))
			return
		}
		if numberWithUnit.MatchString(txt) {
			if unit != "" {
				d.add(nodePos(n), path, "%s has a unit written in the value; write a plain number in %s (the unit is part of the field name)", clip(txt), unit)
			} else {
				d.add(nodePos(n), path, "%s has a unit written in the value; write a plain number", clip(txt))
			}
			return
		}
	}
	if unit != "" {
		d.add(nodePos(n), path, "expected a number in %s, got %s", unit, kindWord(n))
	} else {
		d.add(nodePos(n), path, "expected a number, got %s", kindWord(n))
	}
}

func (d *decoder) float(n ast.Node, v reflect.Value, path string) {
	switch t := n.(type) {
	case *ast.FloatNode:
		v.SetFloat(t.Value)
	case *ast.IntegerNode:
		switch x := t.Value.(type) {
		case int64:
			v.SetFloat(float64(x))
		case uint64:
			v.SetFloat(float64(x))
		}
	case *ast.InfinityNode, *ast.NanNode:
		d.add(nodePos(n), path, "%s is not a finite number", n.GetToken().Value)
		d.bad[path] = true
	default:
		f, ok, err := plainExponent(n)
		switch {
		case !ok:
			d.notNumber(n, path)
		case err != nil:
			d.add(nodePos(n), path, "%v", err)
			d.bad[path] = true
		default:
			v.SetFloat(f)
		}
	}
	if f := v.Float(); math.IsInf(f, 0) {
		d.add(nodePos(n), path, "%s is too large to be a number here", n.GetToken().Value)
		d.bad[path] = true
	}
}

func (d *decoder) integer(n ast.Node, v reflect.Value, path string) {
	switch t := n.(type) {
	case *ast.IntegerNode:
		switch x := t.Value.(type) {
		case int64:
			if v.OverflowInt(x) {
				d.add(nodePos(n), path, "%d is too large", x)
				d.bad[path] = true
				return
			}
			v.SetInt(x)
		case uint64:
			if x > math.MaxInt64 || v.OverflowInt(int64(x)) {
				d.add(nodePos(n), path, "%d is too large", x)
				d.bad[path] = true
				return
			}
			v.SetInt(int64(x))
		}
	case *ast.FloatNode:
		d.whole(n, v, path, t.Value)
	default:
		f, ok, err := plainExponent(n)
		switch {
		case !ok:
			d.notNumber(n, path)
		case err != nil:
			d.add(nodePos(n), path, "%v", err)
			d.bad[path] = true
		default:
			d.whole(n, v, path, f)
		}
	}
}

// whole stores a number written as a float (2.0, 1e3) in an integer field
// when it is a whole number that fits.
func (d *decoder) whole(n ast.Node, v reflect.Value, path string, f float64) {
	if f != math.Trunc(f) || math.Abs(f) > 1<<53 || v.OverflowInt(int64(f)) {
		d.add(nodePos(n), path, "expected a whole number, got %s", n.GetToken().Value)
		d.bad[path] = true
		return
	}
	v.SetInt(int64(f))
}

// sortProblems orders problems by line, then column, keeping the order of
// equal positions.
func sortProblems(ps []Problem) {
	sort.SliceStable(ps, func(i, j int) bool {
		if ps[i].Line != ps[j].Line {
			return ps[i].Line < ps[j].Line
		}
		return ps[i].Column < ps[j].Column
	})
}
