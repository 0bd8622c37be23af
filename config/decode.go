package config

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"reflect"
	"regexp"
	"strconv"
	"strings"
	"sync"

	"go.yaml.in/yaml/v3"
)

// maxFileBytes caps the size of a configuration file.
const maxFileBytes = 4 << 20

// maxNodes caps the nodes visited while decoding, counting every alias
// expansion, against "billion laughs" documents.
const maxNodes = 200_000

// maxProblemScan caps the bytes re-parsed while locating a syntax error.
const maxProblemScan = 8 << 20

// source records where a parsed Config came from, so that later validation
// can name the line of every field.
type source struct {
	file  string
	lines map[string]int // field path -> line of its key (or sequence item)
	bad   map[string]bool
}

// Load reads the file at path and parses it with [Parse].
func Load(path string) (*Config, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("config: %w", err)
	}
	defer f.Close()
	data, err := io.ReadAll(io.LimitReader(f, maxFileBytes+1))
	if err != nil {
		return nil, fmt.Errorf("config: %w", err)
	}
	if len(data) > maxFileBytes {
		return nil, Errors{{File: path, Msg: fmt.Sprintf("file is larger than %d bytes", maxFileBytes)}}
	}
	return Parse(path, data)
}

// Parse decodes data, named name in errors, strictly onto the defaults and
// validates the result. On any problem it returns nil and [Errors] listing
// every problem found, each with its line and field path.
func Parse(name string, data []byte) (*Config, error) {
	root, err := parseNode(name, data)
	if err != nil {
		return nil, err
	}
	c := Default()
	d := &decoder{src: &source{file: name, lines: map[string]int{}, bad: map[string]bool{}}}
	c.src = d.src
	if root != nil {
		d.src.lines[""] = root.Line
		d.decode(root, reflect.ValueOf(c).Elem(), "", 0)
	} else {
		d.src.lines[""] = 1
	}
	errs := d.errs
	errs = append(errs, c.validate()...)
	if err := errs.errOrNil(); err != nil {
		return nil, err
	}
	return c, nil
}

// parseNode parses data into the root node of its single document; nil for
// an empty document.
func parseNode(name string, data []byte) (*yaml.Node, error) {
	dec := yaml.NewDecoder(bytes.NewReader(data))
	var doc yaml.Node
	if err := dec.Decode(&doc); err != nil {
		if errors.Is(err, io.EOF) {
			return nil, nil
		}
		return nil, syntaxError(name, data, err)
	}
	var extra yaml.Node
	if err := dec.Decode(&extra); err == nil {
		return nil, Errors{{File: name, Line: extra.Line, Msg: "more than one YAML document (remove the extra ---)"}}
	} else if !errors.Is(err, io.EOF) {
		return nil, syntaxError(name, data, err)
	}
	if len(doc.Content) == 0 {
		return nil, nil
	}
	root := doc.Content[0]
	if root.Kind == yaml.ScalarNode && root.ShortTag() == "!!null" {
		return nil, nil
	}
	return root, nil
}

var yamlLine = regexp.MustCompile(`^yaml: line (\d+): (.*)$`)

// syntaxError turns a YAML library error into Errors with the line.
func syntaxError(name string, data []byte, err error) error {
	msg := strings.TrimPrefix(err.Error(), "yaml: ")
	line := 0
	if m := yamlLine.FindStringSubmatch(err.Error()); m != nil {
		line, _ = strconv.Atoi(m[1])
		msg = m[2]
	}
	if l := problemLine(data, msg); l > 0 {
		line = l
	}
	return Errors{{File: name, Line: line, Msg: "invalid YAML: " + msg}}
}

// problemLine finds the line of a syntax error: the first line at which a
// prefix of the document fails with the same message. The YAML library
// reports the line where the enclosing block starts (and, for parser
// errors, 0-based), which is often far from the mistake. 0 if not found.
func problemLine(data []byte, msg string) int {
	lines := bytes.SplitAfter(data, []byte("\n"))
	var prefix []byte
	scanned := 0
	for i, l := range lines {
		prefix = append(prefix, l...)
		if scanned += len(prefix); scanned > maxProblemScan {
			return 0 // quadratic; a configuration file is far shorter
		}
		dec := yaml.NewDecoder(bytes.NewReader(prefix))
		var n yaml.Node
		for {
			err := dec.Decode(&n)
			if err == nil {
				continue
			}
			if !errors.Is(err, io.EOF) && strings.HasSuffix(err.Error(), ": "+msg) {
				return i + 1
			}
			break
		}
	}
	return 0
}

// decoder walks a node tree and sets struct fields by their yaml tags,
// collecting every unknown key and type error instead of stopping at the
// first. (yaml.Node.Decode does not honour KnownFields, so the strictness
// is implemented here.)
type decoder struct {
	src   *source
	errs  Errors
	nodes int // nodes visited; past maxNodes decoding stops
}

// fail records a decoding problem at node n and marks path as reported.
func (d *decoder) fail(n *yaml.Node, path, format string, args ...any) {
	d.errs = append(d.errs, &FieldError{File: d.src.file, Line: n.Line, Field: path, Msg: fmt.Sprintf(format, args...)})
	d.src.bad[path] = true
}

var (
	unmarshalerType = reflect.TypeFor[yaml.Unmarshaler]()
	modelType       = reflect.TypeFor[Model]()
)

// decode stores n into v, whose field path is path.
func (d *decoder) decode(n *yaml.Node, v reflect.Value, path string, depth int) {
	if d.nodes++; d.nodes > maxNodes {
		if d.nodes == maxNodes+1 {
			d.fail(n, path, "document is too large once its aliases are expanded (more than %d values)", maxNodes)
		}
		return
	}
	if depth > 32 {
		d.fail(n, path, "nested too deeply")
		return
	}
	if n.Kind == yaml.AliasNode {
		// Report a problem with the aliased value itself on the line of the
		// alias, where its field path is; nested keys keep their own lines.
		target := *n.Alias
		target.Line, target.Column = n.Line, n.Column
		n = &target
	}
	if n.Kind == yaml.ScalarNode && n.ShortTag() == "!!null" {
		return // an empty value keeps the default
	}
	if reflect.PointerTo(v.Type()).Implements(unmarshalerType) {
		if err := v.Addr().Interface().(yaml.Unmarshaler).UnmarshalYAML(n); err != nil {
			d.fail(n, path, "%s", err.Error())
		}
		return
	}
	switch v.Kind() {
	case reflect.Struct:
		d.decodeStruct(n, v, path, depth)
	case reflect.Slice:
		d.decodeSlice(n, v, path, depth)
	default:
		d.decodeScalar(n, v, path)
	}
}

// decodeStruct decodes a mapping into a struct, field by field.
func (d *decoder) decodeStruct(n *yaml.Node, v reflect.Value, path string, depth int) {
	if n.Kind != yaml.MappingNode {
		d.fail(n, path, "expected a mapping, got %s", describe(n))
		return
	}
	fields, names := yamlFields(v.Type())
	seen := map[string]int{}
	// Merge keys (<<) first, so that explicit keys override them.
	for i := 0; i+1 < len(n.Content); i += 2 {
		if k := n.Content[i]; k.Kind == yaml.ScalarNode && k.Value == "<<" && k.ShortTag() == "!!merge" {
			d.merge(n.Content[i+1], v, path, depth)
		}
	}
	for i := 0; i+1 < len(n.Content); i += 2 {
		k, val := n.Content[i], n.Content[i+1]
		if k.Kind == yaml.ScalarNode && k.Value == "<<" && k.ShortTag() == "!!merge" {
			continue
		}
		if k.Kind != yaml.ScalarNode {
			d.fail(k, path, "a key must be a plain name, got %s", describe(k))
			continue
		}
		p := join(path, k.Value)
		idx, ok := fields[k.Value]
		if !ok {
			d.fail(k, p, "unknown field%s (allowed: %s)", suggest(k.Value, names), strings.Join(names, ", "))
			continue
		}
		if first, dup := seen[k.Value]; dup {
			d.fail(k, p, "duplicate field (first set on line %d)", first)
			continue
		}
		seen[k.Value] = k.Line
		d.src.lines[p] = k.Line
		d.decode(val, v.Field(idx), p, depth+1)
	}
}

// merge applies the value of a << key: a mapping or a list of mappings.
func (d *decoder) merge(n *yaml.Node, v reflect.Value, path string, depth int) {
	if n.Kind == yaml.AliasNode {
		d.nodes++
		n = n.Alias
	}
	if n.Kind == yaml.SequenceNode {
		for i := len(n.Content) - 1; i >= 0; i-- { // earlier maps take precedence
			d.decode(n.Content[i], v, path, depth+1)
		}
		return
	}
	d.decode(n, v, path, depth+1)
}

// decodeSlice decodes a sequence; each Model element starts from DefaultModel.
func (d *decoder) decodeSlice(n *yaml.Node, v reflect.Value, path string, depth int) {
	if n.Kind != yaml.SequenceNode {
		d.fail(n, path, "expected a list, got %s", describe(n))
		return
	}
	if len(n.Content) == 0 {
		v.SetZero() // [] and a missing key mean the same: nil
		return
	}
	out := reflect.MakeSlice(v.Type(), 0, len(n.Content))
	for i, item := range n.Content {
		p := fmt.Sprintf("%s[%d]", path, i)
		d.src.lines[p] = item.Line
		e := reflect.New(v.Type().Elem()).Elem()
		if e.Type() == modelType {
			e.Set(reflect.ValueOf(DefaultModel()))
		}
		d.decode(item, e, p, depth+1)
		out = reflect.Append(out, e)
	}
	v.Set(out)
}

// decodeScalar decodes a scalar into a string, bool, integer or float.
func (d *decoder) decodeScalar(n *yaml.Node, v reflect.Value, path string) {
	if n.Kind != yaml.ScalarNode {
		d.fail(n, path, "expected %s, got %s", kindName(v.Kind()), describe(n))
		return
	}
	tag := n.ShortTag()
	switch v.Kind() {
	case reflect.String:
		if tag == "!!binary" {
			d.fail(n, path, "expected a string, got %s", describe(n))
			return
		}
		v.SetString(n.Value)
	case reflect.Bool:
		var b bool
		if tag != "!!bool" || n.Decode(&b) != nil {
			d.fail(n, path, "expected true or false, got %s", describe(n))
			return
		}
		v.SetBool(b)
	case reflect.Int, reflect.Int64:
		i, ok := scalarInt(n)
		if !ok || v.OverflowInt(i) {
			d.fail(n, path, "expected an integer, got %s", describe(n))
			return
		}
		v.SetInt(i)
	case reflect.Float64:
		var f float64
		if (tag != "!!int" && tag != "!!float") || n.Decode(&f) != nil {
			d.fail(n, path, "expected a number, got %s", describe(n))
			return
		}
		v.SetFloat(f)
	default:
		panic("config: no decoder for " + v.Type().String()) // programmer error: a new field type
	}
}

// scalarInt reads an integer scalar; a float is accepted when whole.
func scalarInt(n *yaml.Node) (int64, bool) {
	switch n.ShortTag() {
	case "!!int":
		var i int64
		return i, n.Decode(&i) == nil
	case "!!float":
		var f float64
		if n.Decode(&f) != nil || f != float64(int64(f)) || f > 1<<62 || f < -(1<<62) {
			return 0, false
		}
		return int64(f), true
	}
	return 0, false
}

// fieldCache holds yamlFields results by type.
var fieldCache sync.Map // reflect.Type -> structFields

type structFields struct {
	index map[string]int
	names []string
}

// yamlFields maps the yaml keys of struct type t to field indexes, and
// lists the keys in declaration order.
func yamlFields(t reflect.Type) (map[string]int, []string) {
	if f, ok := fieldCache.Load(t); ok {
		sf := f.(structFields)
		return sf.index, sf.names
	}
	m := map[string]int{}
	var names []string
	for i := range t.NumField() {
		f := t.Field(i)
		key, _, _ := strings.Cut(f.Tag.Get("yaml"), ",")
		if !f.IsExported() || key == "" || key == "-" {
			continue
		}
		m[key] = i
		names = append(names, key)
	}
	fieldCache.Store(t, structFields{m, names})
	return m, names
}

// join appends key to the field path.
func join(path, key string) string {
	if path == "" {
		return key
	}
	return path + "." + key
}

// describe names a node's value for an error message.
func describe(n *yaml.Node) string {
	switch n.Kind {
	case yaml.MappingNode:
		return "a mapping"
	case yaml.SequenceNode:
		return "a list"
	case yaml.AliasNode:
		return "an alias"
	}
	v := n.Value
	if len(v) > 40 {
		v = v[:40] + "..."
	}
	switch n.ShortTag() {
	case "!!str":
		return strconv.Quote(v)
	case "!!null":
		return "null"
	}
	return v
}

// kindName describes what a Go kind expects.
func kindName(k reflect.Kind) string {
	switch k {
	case reflect.String:
		return "a string"
	case reflect.Bool:
		return "true or false"
	case reflect.Float64:
		return "a number"
	}
	return "an integer"
}

// suggest returns ` (did you mean "x"?)` for the allowed name closest to
// key, if it is within two edits.
func suggest(key string, names []string) string {
	best, bestD := "", 3
	for _, n := range names {
		if d := editDistance(key, n); d < bestD {
			best, bestD = n, d
		}
	}
	if best == "" {
		return ""
	}
	return fmt.Sprintf("; did you mean %q?", best)
}

// editDistance is the Levenshtein distance between a and b (bytes).
func editDistance(a, b string) int {
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			cost := 1
			if a[i-1] == b[j-1] {
				cost = 0
			}
			cur[j] = min(prev[j]+1, cur[j-1]+1, prev[j-1]+cost)
		}
		prev, cur = cur, prev
	}
	return prev[len(b)]
}
