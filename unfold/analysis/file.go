package analysis

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"reflect"
	"regexp"
	"strconv"
	"strings"

	"go.yaml.in/yaml/v3"

	"github.com/desmear/desmear/binning"
)

// The YAML structure of an analysis file. Field tags are the keys; see
// the package documentation and the reference page for their meaning.
type fileDoc struct {
	Title       string        `yaml:"title"`
	Binning     binningDoc    `yaml:"binning"`
	Observables levelsDoc     `yaml:"observables"`
	Simulation  []sampleDoc   `yaml:"simulation"`
	Response    string        `yaml:"response"`
	Data        dataDoc       `yaml:"data"`
	Backgrounds []bkgDoc      `yaml:"backgrounds"`
	Unfolding   unfoldingDoc  `yaml:"unfolding"`
	Uncertainty uncertainDoc  `yaml:"uncertainty"`
	Output      outputDoc     `yaml:"output"`
	Processing  processingDoc `yaml:"processing"`
}

type binningDoc struct {
	Truth schemeRef `yaml:"truth"`
	Reco  schemeRef `yaml:"reco"`
}

// schemeRef is a binning scheme given by path or inline.
type schemeRef struct {
	node *yaml.Node
}

func (s *schemeRef) UnmarshalYAML(n *yaml.Node) error {
	s.node = n
	return nil
}

// exprMap is a mapping from axis name to expression, kept in file order.
type exprMap struct {
	node *yaml.Node
}

func (e *exprMap) UnmarshalYAML(n *yaml.Node) error {
	e.node = n
	return nil
}

type levelsDoc struct {
	Truth exprMap `yaml:"truth"`
	Reco  exprMap `yaml:"reco"`
}

type sampleDoc struct {
	File           string  `yaml:"file"`
	Tree           string  `yaml:"tree"`
	Weight         string  `yaml:"weight"`
	TruthSelection string  `yaml:"truth_selection"`
	RecoSelection  string  `yaml:"reco_selection"`
	Scale          float64 `yaml:"scale"`
	Truth          exprMap `yaml:"truth_observables"`
	Reco           exprMap `yaml:"reco_observables"`
}

type dataDoc struct {
	Events      string  `yaml:"events"`
	Tree        string  `yaml:"tree"`
	Weight      string  `yaml:"weight"`
	Selection   string  `yaml:"selection"`
	Observables exprMap `yaml:"observables"`
	Histogram   string  `yaml:"histogram"`
	Name        string  `yaml:"name"`
	Table       string  `yaml:"table"`
}

type bkgDoc struct {
	Name             string  `yaml:"name"`
	Events           string  `yaml:"events"`
	Tree             string  `yaml:"tree"`
	Weight           string  `yaml:"weight"`
	Selection        string  `yaml:"selection"`
	Observables      exprMap `yaml:"observables"`
	Table            string  `yaml:"table"`
	Scale            float64 `yaml:"scale"`
	ScaleUncertainty float64 `yaml:"scale_uncertainty"`
}

type unfoldingDoc struct {
	Iterations    int     `yaml:"iterations"`
	StopChi2      float64 `yaml:"stop_chi2"`
	MaxIterations int     `yaml:"max_iterations"`
	Prior         string  `yaml:"prior"`
	PriorFile     string  `yaml:"prior_file"`
	Smoothing     float64 `yaml:"smoothing"`
	Background    string  `yaml:"background"`
	Fakes         string  `yaml:"fakes"`
	MemoryLimit   float64 `yaml:"memory_limit_gib"`
}

type uncertainDoc struct {
	Covariance string `yaml:"covariance"`
	Method     string `yaml:"method"`
	Probes     int    `yaml:"probes"`
	Toys       int    `yaml:"toys"`
	Seed       uint64 `yaml:"seed"`
}

type outputDoc struct {
	Folder         string   `yaml:"folder"`
	Formats        []string `yaml:"formats"`
	Luminosity     float64  `yaml:"luminosity"`
	LuminosityUnit string   `yaml:"luminosity_unit"`
}

type processingDoc struct {
	Workers   int `yaml:"workers"`
	BatchSize int `yaml:"batch_size"`
}

// Error is a problem in an analysis file: the file, the line (1-based,
// 0 if unknown), the field (a path such as "simulation[0].weight") and
// what is wrong.
type Error struct {
	File  string
	Line  int
	Field string
	Msg   string
	Err   error // underlying error, if any
}

func (e *Error) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	if e.Line > 0 {
		fmt.Fprintf(&b, ":%d", e.Line)
	}
	if e.Field != "" {
		fmt.Fprintf(&b, ": %s", e.Field)
	}
	fmt.Fprintf(&b, ": %s", e.Msg)
	return b.String()
}

func (e *Error) Unwrap() error { return e.Err }

// Errors is a list of problems found in one file, in file order.
type Errors []*Error

func (es Errors) Error() string {
	parts := make([]string, len(es))
	for i, e := range es {
		parts[i] = e.Error()
	}
	return strings.Join(parts, "\n")
}

// Unwrap returns the individual errors.
func (es Errors) Unwrap() []error {
	out := make([]error, len(es))
	for i, e := range es {
		out[i] = e
	}
	return out
}

var (
	lineRe    = regexp.MustCompile(`^line (\d+): (.*)$`)
	unknownRe = regexp.MustCompile(`^field (\S+) not found in type (\S+)$`)
	typeRe    = regexp.MustCompile(`^cannot unmarshal (\S+)(?: (.*))? into (\S+)$`)
)

// allowed lists the keys of each section type, for unknown-key messages.
var allowed = map[string]reflect.Type{}

func init() {
	for _, v := range []any{fileDoc{}, binningDoc{}, levelsDoc{}, sampleDoc{}, dataDoc{}, bkgDoc{}, unfoldingDoc{}, uncertainDoc{}, outputDoc{}, processingDoc{}} {
		t := reflect.TypeOf(v)
		allowed["analysis."+t.Name()] = t
	}
}

func keysOf(t reflect.Type) []string {
	var keys []string
	for i := 0; i < t.NumField(); i++ {
		tag := t.Field(i).Tag.Get("yaml")
		if tag != "" && tag != "-" {
			keys = append(keys, tag)
		}
	}
	return keys
}

func sectionName(typ string) string {
	switch typ {
	case "analysis.fileDoc":
		return "the top level"
	case "analysis.binningDoc":
		return "binning"
	case "analysis.levelsDoc":
		return "observables"
	case "analysis.sampleDoc":
		return "a simulation sample"
	case "analysis.dataDoc":
		return "data"
	case "analysis.bkgDoc":
		return "a background"
	case "analysis.unfoldingDoc":
		return "unfolding"
	case "analysis.uncertainDoc":
		return "uncertainty"
	case "analysis.outputDoc":
		return "output"
	case "analysis.processingDoc":
		return "processing"
	}
	return typ
}

// translate turns the YAML library's messages into Errors of file; root,
// when not nil, is the document's node tree, used to name the field of
// a type error.
func translate(file string, err error, root *yaml.Node) error {
	var te *yaml.TypeError
	if errors.As(err, &te) {
		var es Errors
		for _, m := range te.Errors {
			e := &Error{File: file, Msg: m}
			if sm := lineRe.FindStringSubmatch(m); sm != nil {
				e.Line, _ = strconv.Atoi(sm[1])
				e.Msg = sm[2]
			}
			if sm := unknownRe.FindStringSubmatch(e.Msg); sm != nil {
				e.Field = sm[1]
				if t, ok := allowed[sm[2]]; ok {
					e.Msg = fmt.Sprintf("unknown key in %s (known keys: %s)", sectionName(sm[2]), strings.Join(keysOf(t), ", "))
				} else {
					e.Msg = "unknown key"
				}
			} else if sm := typeRe.FindStringSubmatch(e.Msg); sm != nil {
				kind := strings.TrimPrefix(sm[1], "!!")
				switch kind {
				case "map":
					kind = "a mapping"
				case "seq":
					kind = "a list"
				case "str":
					kind = "a string"
				case "int":
					kind = "an integer"
				case "float":
					kind = "a number"
				case "bool":
					kind = "true or false"
				case "null":
					kind = "empty (null)"
				default:
					kind = "a " + kind
				}
				if v := strings.Trim(sm[2], "`"); v != "" {
					e.Msg = fmt.Sprintf("value %s is %s, want %s", v, kind, goTypeName(sm[3]))
				} else {
					e.Msg = fmt.Sprintf("the value is %s, want %s", kind, goTypeName(sm[3]))
				}
				if root != nil {
					e.Field = fieldAtLine(root, e.Line, sm[1])
				}
			}
			es = append(es, e)
		}
		return es
	}
	e := &Error{File: file, Msg: strings.TrimPrefix(err.Error(), "yaml: "), Err: err}
	if sm := lineRe.FindStringSubmatch(e.Msg); sm != nil {
		e.Line, _ = strconv.Atoi(sm[1])
		e.Msg = sm[2]
	}
	return e
}

func goTypeName(t string) string {
	switch {
	case strings.HasPrefix(t, "int"), strings.HasPrefix(t, "uint"):
		return "a whole number"
	case strings.HasPrefix(t, "float"):
		return "a number"
	case t == "string":
		return "a string"
	case t == "[]analysis.sampleDoc":
		return "a list of simulated samples (- file: ...)"
	case t == "[]analysis.bkgDoc":
		return "a list of backgrounds (- name: ...)"
	case strings.HasPrefix(t, "[]"):
		return "a list"
	case strings.HasPrefix(t, "analysis."):
		return "a mapping (" + sectionName(t) + ")"
	}
	return t
}

// parse decodes src strictly into the document structure and the node
// tree (kept for positions).
func parse(file string, src []byte) (*fileDoc, *yaml.Node, error) {
	var root yaml.Node
	if err := yaml.Unmarshal(src, &root); err != nil {
		return nil, nil, translate(file, err, nil)
	}
	var doc fileDoc
	dec := yaml.NewDecoder(bytes.NewReader(src))
	dec.KnownFields(true)
	if err := dec.Decode(&doc); err != nil {
		if errors.Is(err, io.EOF) {
			return nil, nil, &Error{File: file, Msg: "the file is empty"}
		}
		return nil, nil, translate(file, err, &root)
	}
	var extra yaml.Node
	if err := dec.Decode(&extra); err == nil {
		return nil, nil, &Error{File: file, Line: extra.Line, Msg: "a second YAML document (---) is not allowed"}
	}
	return &doc, &root, nil
}

// nodeAt returns the node at the path of mapping keys and sequence
// indices, or nil.
func nodeAt(root *yaml.Node, path ...any) *yaml.Node {
	n := root
	if n != nil && n.Kind == yaml.DocumentNode && len(n.Content) > 0 {
		n = n.Content[0]
	}
	for _, p := range path {
		if n == nil {
			return nil
		}
		switch p := p.(type) {
		case string:
			if n.Kind != yaml.MappingNode {
				return nil
			}
			var next *yaml.Node
			for i := 0; i+1 < len(n.Content); i += 2 {
				if n.Content[i].Value == p {
					next = n.Content[i+1]
				}
			}
			n = next
		case int:
			if n.Kind != yaml.SequenceNode || p >= len(n.Content) {
				return nil
			}
			n = n.Content[p]
		}
	}
	return n
}

// schemeFrom decodes a binning scheme given inline (a mapping) or by a
// path relative to dir. Errors inside an inline scheme keep the line
// numbers of the analysis file.
func schemeFrom(file, dir, field string, src []byte, n *yaml.Node) (*binning.Scheme, string, error) {
	switch {
	case n == nil:
		return nil, "", &Error{File: file, Field: field, Msg: "missing: give a binning scheme file or an inline scheme"}
	case n.Kind == yaml.ScalarNode:
		path := resolve(dir, n.Value)
		s, err := binning.ReadFile(path)
		if err != nil {
			var be *binning.Error
			if errors.As(err, &be) {
				return nil, path, err
			}
			return nil, path, &Error{File: file, Line: n.Line, Field: field, Msg: fmt.Sprintf("cannot read the binning scheme %q: %v", n.Value, unwrapPath(err)), Err: err}
		}
		return s, path, nil
	case n.Kind == yaml.MappingNode:
		text := inlineText(src, n)
		s, err := binning.Decode(strings.NewReader(text), file)
		if err != nil {
			var be *binning.Error
			if errors.As(err, &be) {
				cp := *be
				if cp.Field != "" {
					cp.Field = field + "." + cp.Field
				} else {
					cp.Field = field
				}
				return nil, "", &cp
			}
			return nil, "", &Error{File: file, Line: n.Line, Field: field, Msg: err.Error(), Err: err}
		}
		return s, "", nil
	}
	return nil, "", &Error{File: file, Line: n.Line, Field: field, Msg: "want a file name or a mapping with the scheme's regions"}
}

// inlineText returns the source text of the mapping n, blanked outside
// it so that line and column numbers are those of the whole file.
func inlineText(src []byte, n *yaml.Node) string {
	lines := strings.Split(string(src), "\n")
	first := n.Line - 1
	last := maxLine(n) - 1
	// Continue over lines indented deeper than the mapping's first key
	// (closing brackets of flow collections, wrapped values).
	for last+1 < len(lines) {
		l := lines[last+1]
		t := strings.TrimLeft(l, " ")
		if t != "" && !strings.HasPrefix(t, "#") && len(l)-len(t) < n.Column-1 {
			break
		}
		if t != "" && !strings.HasPrefix(t, "#") && len(l)-len(t) == n.Column-1 && n.Style&yaml.FlowStyle == 0 {
			// a sibling key at the same indentation belongs to the mapping
			// only if the mapping's own keys sit there, which maxLine covers.
			break
		}
		last++
	}
	var b strings.Builder
	for i := 0; i < first; i++ {
		b.WriteByte('\n')
	}
	for i := first; i <= last && i < len(lines); i++ {
		l := lines[i]
		if i == first {
			c := min(n.Column-1, len(l))
			l = strings.Repeat(" ", c) + l[c:]
		}
		b.WriteString(l)
		b.WriteByte('\n')
	}
	return b.String()
}

func maxLine(n *yaml.Node) int {
	m := n.Line
	for _, c := range n.Content {
		if l := maxLine(c); l > m {
			m = l
		}
	}
	return m
}

func resolve(dir, p string) string {
	if p == "" || filepath.IsAbs(p) {
		return p
	}
	return filepath.Join(dir, p)
}

// unwrapPath drops the path from an *os.PathError, which the message
// names already.
func unwrapPath(err error) error {
	var pe *os.PathError
	if errors.As(err, &pe) {
		return pe.Err
	}
	return err
}

// fieldAtLine returns the path of the value of the given YAML kind
// (the tag in the library's message: !!map, !!seq, or a scalar tag) that
// starts on line, for messages ("" if none).
func fieldAtLine(root *yaml.Node, line int, tag string) string {
	want := yaml.ScalarNode
	switch tag {
	case "!!map":
		want = yaml.MappingNode
	case "!!seq":
		want = yaml.SequenceNode
	}
	found := ""
	var walk func(n *yaml.Node, path string)
	walk = func(n *yaml.Node, path string) {
		if n == nil || found != "" {
			return
		}
		if n.Line == line && n.Kind == want && path != "" {
			found = path
			return
		}
		switch n.Kind {
		case yaml.DocumentNode:
			for _, c := range n.Content {
				walk(c, path)
			}
		case yaml.MappingNode:
			for i := 0; i+1 < len(n.Content); i += 2 {
				p := n.Content[i].Value
				if path != "" {
					p = path + "." + p
				}
				walk(n.Content[i+1], p)
			}
		case yaml.SequenceNode:
			for i, c := range n.Content {
				walk(c, fmt.Sprintf("%s[%d]", path, i))
			}
		}
	}
	walk(root, "")
	return found
}
