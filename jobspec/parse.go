// Package jobspec owns the job spec as users write it: reading it from YAML
// or JSON into a soakv1.JobSpec, reporting unknown keys and wrong value types
// with their paths, and validating the spec's values (with every problem
// reported at once) before the pipeline meshes and solves it. The CLI, the
// farm's scheduler and its workers all go through this package.
package jobspec

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf16"
	"unicode/utf8"

	"go.yaml.in/yaml/v3"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/reflect/protoreflect"

	soakv1 "soakfarm/proto/soak/v1"
)

// MaxSpecBytes is the largest spec file accepted. Real specs are a few
// kilobytes; the limit keeps a stray binary or a hostile upload from costing
// memory.
const MaxSpecBytes = 4 << 20

// maxValues bounds how many values a spec may expand to. YAML aliases let a
// small file repeat a large block many times; nothing sensible needs this
// many values.
const maxValues = 1_000_000

// ErrSpecTooLarge is returned (wrapped) for a spec over MaxSpecBytes.
var ErrSpecTooLarge = errors.New("spec too large")

// Load reads the spec file at path, choosing YAML or JSON by its extension
// (.yaml, .yml or .json).
func Load(path string) (*soakv1.JobSpec, error) {
	var format string
	switch strings.ToLower(filepath.Ext(path)) {
	case ".yaml", ".yml":
		format = "yaml"
	case ".json":
		format = "json"
	default:
		return nil, fmt.Errorf("spec %s: cannot tell its format from the extension; name it .yaml, .yml or .json", path)
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("reading spec: %w", err)
	}
	defer f.Close()
	// Read one byte past the limit so that Parse sees an oversize file as
	// such without the whole of it ever being read.
	var buf bytes.Buffer
	if _, err := buf.ReadFrom(io.LimitReader(f, MaxSpecBytes+1)); err != nil {
		return nil, fmt.Errorf("reading spec %s: %w", path, err)
	}
	spec, err := Parse(buf.Bytes(), format)
	if err != nil {
		return nil, fmt.Errorf("spec %s: %w", path, err)
	}
	return spec, nil
}

// Parse reads a spec written as YAML or JSON. format is "yaml", "json", or
// "" to guess (JSON when the first non-space byte is '{'). Keys are the
// schema's field names in snake_case. Unknown keys, keys given twice and
// values of the wrong type come back together as a *ValidationError; Parse
// does not check the values themselves (see Validate).
func Parse(data []byte, format string) (*soakv1.JobSpec, error) {
	if len(data) > MaxSpecBytes {
		return nil, fmt.Errorf("%w: more than the %d MiB limit, which is fixed; real specs are a few kilobytes, so keep large data out of the spec (an STL mesh goes in its own file named by stl.file)", ErrSpecTooLarge, MaxSpecBytes>>20)
	}
	if format == "" {
		format = "yaml"
		if t := bytes.TrimLeft(data, " \t\r\n"); len(t) > 0 && t[0] == '{' {
			format = "json"
		}
	}
	switch format {
	case "yaml":
	case "json":
		if err := checkJSONSyntax(data); err != nil {
			return nil, err
		}
		data = jsonAsYAML(data)
	default:
		return nil, fmt.Errorf("unknown spec format %q: want \"yaml\", \"json\" or \"\" to guess", format)
	}

	var doc, next yaml.Node
	dec := yaml.NewDecoder(bytes.NewReader(data))
	if err := dec.Decode(&doc); errors.Is(err, io.EOF) {
		return nil, errors.New("spec is empty")
	} else if err != nil {
		return nil, fmt.Errorf("reading spec as %s: %w", strings.ToUpper(format), err)
	}
	// Two specs pasted into one file would otherwise lose the second
	// without a word.
	if err := dec.Decode(&next); !errors.Is(err, io.EOF) {
		return nil, fmt.Errorf("line %d: a spec file holds one YAML document; this is a second one", next.Line)
	}
	if len(doc.Content) == 0 {
		return nil, errors.New("spec is empty")
	}
	root := doc.Content[0]
	if root.Kind != yaml.MappingNode {
		return nil, fmt.Errorf("line %d: a spec is a mapping of keys to values, not %s", root.Line, describe(root))
	}

	spec := &soakv1.JobSpec{}
	w := walker{}
	generic := w.message(root, spec.ProtoReflect().Descriptor(), "")
	if len(w.problems) > 0 {
		return nil, &ValidationError{Problems: w.problems}
	}
	js, err := json.Marshal(generic)
	if err != nil {
		return nil, fmt.Errorf("converting spec to JSON: %w", err)
	}
	// The walk above has already checked every key and type, so a failure
	// here means the walk and protojson disagree.
	if err := (protojson.UnmarshalOptions{}).Unmarshal(js, spec); err != nil {
		return nil, fmt.Errorf("decoding spec: %w", err)
	}
	return spec, nil
}

// checkJSONSyntax reports a JSON syntax error with its line, which the
// YAML reader would describe in YAML's terms.
func checkJSONSyntax(data []byte) error {
	var v any
	err := json.Unmarshal(data, &v)
	var syn *json.SyntaxError
	if errors.As(err, &syn) {
		line := 1 + bytes.Count(data[:min(int(syn.Offset), len(data))], []byte{'\n'})
		return fmt.Errorf("reading spec as JSON: line %d: %w", line, err)
	}
	if err != nil {
		return fmt.Errorf("reading spec as JSON: %w", err)
	}
	return nil
}

// jsonAsYAML rewrites valid JSON into YAML that reads the same, keeping
// every token on its line so that problems keep their line numbers. Tabs
// between tokens become spaces (YAML refuses tabs as indentation); in
// strings, the escapes YAML lacks are rewritten: "\/" as "/", a UTF-16
// surrogate pair as one "\U" escape, and a lone surrogate as U+FFFD, which
// is what JSON decoders make of it; characters YAML refuses raw (DEL, C1
// controls, invalid UTF-8, again as U+FFFD) become "\U" escapes.
func jsonAsYAML(data []byte) []byte {
	out := make([]byte, 0, len(data))
	inString := false
	for i := 0; i < len(data); i++ {
		b := data[i]
		switch {
		case !inString && b == '\t':
			out = append(out, ' ')
		case !inString:
			inString = b == '"'
			out = append(out, b)
		case b == '"':
			inString = false
			out = append(out, b)
		case b >= 0x7f: // DEL and all non-ASCII
			r, size := utf8.DecodeRune(data[i:])
			if yamlPrintable(r) && (r != utf8.RuneError || size > 1) {
				out = append(out, data[i:i+size]...)
			} else {
				out = fmt.Appendf(out, "\\U%08X", r)
			}
			i += size - 1
		case b != '\\':
			out = append(out, b)
		case data[i+1] == '/': // valid JSON: a backslash is never last
			out = append(out, '/')
			i++
		case data[i+1] == 'u':
			r, n := jsonUnicodeEscape(data[i:])
			if utf16.IsSurrogate(r) {
				r = unicode.ReplacementChar
			}
			out = fmt.Appendf(out, "\\U%08X", r)
			i += n - 1
		default:
			out = append(out, b, data[i+1])
			i++
		}
	}
	return out
}

// yamlPrintable reports whether YAML keeps r as it is in a quoted string:
// printable (YAML 1.2, section 5.1) and not one of the line breaks YAML
// folds into a space (NEL, LS, PS).
func yamlPrintable(r rune) bool {
	switch r {
	case 0x85, 0x2028, 0x2029:
		return false
	}
	return r < 0x7f || (r >= 0xa0 && r <= 0xd7ff) || (r >= 0xe000 && r <= 0xfffd) || r >= 0x10000
}

// jsonUnicodeEscape decodes the \uXXXX escape at the start of s, joining
// it with a following low surrogate escape, and returns the rune and the
// number of bytes used. Valid JSON guarantees the four hex digits.
func jsonUnicodeEscape(s []byte) (rune, int) {
	hex := func(s []byte) rune {
		v, _ := strconv.ParseUint(string(s[2:6]), 16, 32)
		return rune(v)
	}
	r := hex(s)
	if len(s) >= 12 && s[6] == '\\' && s[7] == 'u' {
		if joined := utf16.DecodeRune(r, hex(s[6:])); joined != unicode.ReplacementChar {
			return joined, 12
		}
	}
	return r, 6
}

// walker checks a YAML tree against the schema and builds the generic value
// protojson reads, collecting a Problem for every unknown key and wrong type.
type walker struct {
	problems []Problem
	values   int
}

func (w *walker) add(n *yaml.Node, field, value, msg string) {
	w.problems = append(w.problems, Problem{Field: field, Value: value, Message: msg, Line: n.Line})
}

// resolve follows aliases and counts the values visited; it returns nil
// once the spec has expanded past maxValues.
func (w *walker) resolve(n *yaml.Node, path string) *yaml.Node {
	for n.Kind == yaml.AliasNode && n.Alias != nil {
		n = n.Alias
	}
	w.values++
	if w.values == maxValues {
		w.add(n, path, "", fmt.Sprintf("spec expands to more than %d values (through YAML aliases)", maxValues))
	}
	if w.values >= maxValues {
		return nil
	}
	return n
}

func (w *walker) message(n *yaml.Node, md protoreflect.MessageDescriptor, path string) map[string]any {
	out := map[string]any{}
	seen := map[string]int{}                 // key → line of its first use
	oneofs := map[protoreflect.Name]string{} // oneof → key that set it
	for i := 0; i+1 < len(n.Content); i += 2 {
		keyNode, valNode := n.Content[i], n.Content[i+1]
		if keyNode.Kind != yaml.ScalarNode {
			w.add(keyNode, path, describe(keyNode), "a key must be plain text")
			continue
		}
		key := keyNode.Value
		kpath := join(path, key)
		if keyNode.ShortTag() == "!!merge" {
			w.add(keyNode, kpath, "", "merge keys are not supported; write the keys out, or alias a whole value")
			continue
		}
		if first, dup := seen[key]; dup {
			w.add(keyNode, kpath, "", fmt.Sprintf("key given twice (first on line %d)", first))
			continue
		}
		seen[key] = keyNode.Line
		fd := md.Fields().ByName(protoreflect.Name(key))
		if fd == nil {
			w.add(keyNode, kpath, "", "unknown key"+suggest(key, md))
			continue
		}
		if oo := fd.ContainingOneof(); oo != nil && !oo.IsSynthetic() {
			if other, taken := oneofs[oo.Name()]; taken {
				w.add(keyNode, kpath, "", fmt.Sprintf("%s takes only one of %s; %s is already given", displayPath(path), oneofChoices(oo), other))
				continue
			}
			oneofs[oo.Name()] = key
		}
		v := w.resolve(valNode, kpath)
		if v == nil {
			return out
		}
		if v.ShortTag() == "!!null" {
			continue // an empty value leaves the field unset
		}
		if fd.IsMap() {
			if v.Kind != yaml.MappingNode {
				w.add(v, kpath, describe(v), "must be a mapping of names to values")
				continue
			}
			entries := map[string]any{}
			for j := 0; j+1 < len(v.Content); j += 2 {
				nameNode := v.Content[j]
				if nameNode.Kind != yaml.ScalarNode || nameNode.ShortTag() != "!!str" {
					w.add(nameNode, kpath, describe(nameNode), "a name must be text")
					continue
				}
				epath := kpath + "." + nameNode.Value
				if _, dup := entries[nameNode.Value]; dup {
					w.add(nameNode, epath, "", "name given twice")
					continue
				}
				item := w.resolve(v.Content[j+1], epath)
				if item == nil {
					return out
				}
				if gv, ok := w.single(item, fd.MapValue(), epath); ok {
					entries[nameNode.Value] = gv
				}
			}
			out[fd.JSONName()] = entries
			continue
		}
		if fd.IsList() {
			if v.Kind != yaml.SequenceNode {
				w.add(v, kpath, describe(v), "must be a list")
				continue
			}
			list := make([]any, 0, len(v.Content))
			for j, item := range v.Content {
				ipath := fmt.Sprintf("%s[%d]", kpath, j)
				item = w.resolve(item, ipath)
				if item == nil {
					return out
				}
				if gv, ok := w.single(item, fd, ipath); ok {
					list = append(list, gv)
				}
			}
			out[fd.JSONName()] = list
			continue
		}
		if gv, ok := w.single(v, fd, kpath); ok {
			out[fd.JSONName()] = gv
		}
	}
	return out
}

// single converts one value of field fd (one element, for a list field).
func (w *walker) single(n *yaml.Node, fd protoreflect.FieldDescriptor, path string) (any, bool) {
	tag := n.ShortTag()
	switch fd.Kind() {
	case protoreflect.MessageKind:
		if n.Kind != yaml.MappingNode {
			w.add(n, path, describe(n), "must be a mapping of keys to values")
			return nil, false
		}
		return w.message(n, fd.Message(), path), true
	case protoreflect.DoubleKind:
		f, ok := w.number(n, path)
		if !ok {
			return nil, false
		}
		// JSON has no literal for these; protojson reads them as strings.
		switch {
		case math.IsNaN(f):
			return "NaN", true
		case math.IsInf(f, 1):
			return "Infinity", true
		case math.IsInf(f, -1):
			return "-Infinity", true
		}
		return f, true
	case protoreflect.Uint32Kind:
		f, ok := w.number(n, path)
		if !ok {
			return nil, false
		}
		if f != math.Trunc(f) || f < 0 || f > math.MaxUint32 {
			w.add(n, path, n.Value, "must be a whole number from 0 to 4294967295")
			return nil, false
		}
		return uint64(f), true
	case protoreflect.StringKind:
		if n.Kind != yaml.ScalarNode || tag != "!!str" {
			w.add(n, path, describe(n), "must be text (put it in quotes)")
			return nil, false
		}
		return n.Value, true
	case protoreflect.BoolKind:
		var b bool
		if n.Kind != yaml.ScalarNode || tag != "!!bool" || n.Decode(&b) != nil {
			w.add(n, path, describe(n), "must be true or false")
			return nil, false
		}
		return b, true
	}
	if fd.Kind() == protoreflect.BytesKind {
		w.add(n, path, "", "is filled in from the file when a job is submitted to the farm; give file instead")
		return nil, false
	}
	w.add(n, path, "", fmt.Sprintf("the spec reader does not handle %s fields", fd.Kind()))
	return nil, false
}

func (w *walker) number(n *yaml.Node, path string) (float64, bool) {
	var f float64
	tag := n.ShortTag()
	if n.Kind != yaml.ScalarNode || (tag != "!!int" && tag != "!!float") || n.Decode(&f) != nil {
		w.add(n, path, describe(n), "must be a number")
		return 0, false
	}
	return f, true
}

// describe shows a YAML value in a message: scalars as written (text in
// quotes), collections by kind.
func describe(n *yaml.Node) string {
	switch n.Kind {
	case yaml.MappingNode:
		return "a mapping"
	case yaml.SequenceNode:
		return "a list"
	case yaml.ScalarNode:
		if n.ShortTag() == "!!str" {
			return strconv.Quote(n.Value)
		}
		if n.ShortTag() == "!!null" {
			return "null"
		}
		return n.Value
	}
	return "an alias"
}

func join(path, key string) string {
	if path == "" {
		return key
	}
	return path + "." + key
}

func displayPath(path string) string {
	if path == "" {
		return "the spec"
	}
	return path
}

func oneofChoices(oo protoreflect.OneofDescriptor) string {
	names := make([]string, oo.Fields().Len())
	for i := range names {
		names[i] = string(oo.Fields().Get(i).Name())
	}
	return strings.Join(names, ", ")
}

// suggest names the field a mistyped key most likely meant: the one whose
// camelCase form it is, or one within two edits of it.
func suggest(key string, md protoreflect.MessageDescriptor) string {
	best, bestDist := "", 3
	fields := md.Fields()
	for i := range fields.Len() {
		fd := fields.Get(i)
		name := string(fd.Name())
		if key == fd.JSONName() {
			return "; write it as " + name
		}
		if d := editDistance(key, name); d < bestDist {
			best, bestDist = name, d
		}
	}
	if best == "" {
		return ""
	}
	return "; did you mean " + best + "?"
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
