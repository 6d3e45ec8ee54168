package analysis

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"reflect"
	"strconv"
	"strings"

	"go.yaml.in/yaml/v3"

	"github.com/desmear/desmear/binning"
)

// The YAML structure of an analysis file. Field tags are the keys; see
// the package documentation and the reference page for their meaning.
type fileDoc struct {
	Title       string         `yaml:"title"`
	Binning     binningDoc     `yaml:"binning"`
	Observables levelsDoc      `yaml:"observables"`
	Simulation  []sampleDoc    `yaml:"simulation"`
	Response    string         `yaml:"response"`
	Data        dataDoc        `yaml:"data"`
	Backgrounds []bkgDoc       `yaml:"backgrounds"`
	Unfolding   unfoldingDoc   `yaml:"unfolding"`
	Uncertainty uncertainDoc   `yaml:"uncertainty"`
	Output      outputDoc      `yaml:"output"`
	Processing  processingDoc  `yaml:"processing"`
	Validation  validationDoc  `yaml:"validation"`
	Compare     string         `yaml:"compare"`
	Variations  []variationDoc `yaml:"variations"`
}

// changeDoc is one change of a systematic variation: exactly one kind.
type changeDoc struct {
	Files           []string `yaml:"files"`
	Weight          string   `yaml:"weight"`
	BackgroundScale float64  `yaml:"background_scale"`
	Background      string   `yaml:"background"`
	RecoObservables exprMap  `yaml:"reco_observables"`
}

// variationDoc is a systematic variation: a name and one change, or an
// up/down pair of changes.
type variationDoc struct {
	Name            string    `yaml:"name"`
	Files           []string  `yaml:"files"`
	Weight          string    `yaml:"weight"`
	BackgroundScale float64   `yaml:"background_scale"`
	Background      string    `yaml:"background"`
	RecoObservables exprMap   `yaml:"reco_observables"`
	Up              changeDoc `yaml:"up"`
	Down            changeDoc `yaml:"down"`
}

// validationDoc is what only a validation uses.
type validationDoc struct {
	Stress []stressDoc `yaml:"stress"`
}

type stressDoc struct {
	Name   string `yaml:"name"`
	Weight string `yaml:"weight"`
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

// iterationsDoc is a number of iterations or the word auto.
type iterationsDoc struct {
	n    int
	auto bool
}

func (d *iterationsDoc) UnmarshalYAML(n *yaml.Node) error {
	if n.Kind == yaml.ScalarNode && n.Value == "auto" {
		d.auto = true
		return nil
	}
	return n.Decode(&d.n)
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
	Method        string        `yaml:"method"`
	Iterations    iterationsDoc `yaml:"iterations"`
	StopChi2      float64       `yaml:"stop_chi2"`
	MaxIterations int           `yaml:"max_iterations"`
	Prior         string        `yaml:"prior"`
	PriorFile     string        `yaml:"prior_file"`
	Smoothing     float64       `yaml:"smoothing"`
	Tau           float64       `yaml:"tau"`
	TauCriterion  string        `yaml:"tau_criterion"`
	Penalty       string        `yaml:"penalty"`
	Widths        bool          `yaml:"divide_by_widths"`
	Bias          string        `yaml:"bias"`
	Background    string        `yaml:"background"`
	Fakes         string        `yaml:"fakes"`
	NegativeCells string        `yaml:"negative_cells"`
	Unexplained   string        `yaml:"unexplained"`
	MemoryLimit   float64       `yaml:"memory_limit_gib"`
}

type uncertainDoc struct {
	Covariance string `yaml:"covariance"`
	Method     string `yaml:"method"`
	Probes     int    `yaml:"probes"`
	Toys       int    `yaml:"toys"`
	Seed       uint64 `yaml:"seed"`

	ResponseSamples int    `yaml:"response_samples"`
	SamplingPrior   string `yaml:"sampling_prior"`

	Replicas int `yaml:"replicas"`

	BiasToys     int    `yaml:"bias_toys"`
	VarianceFrom string `yaml:"variance_from"`
}

type outputDoc struct {
	Folder         string       `yaml:"folder"`
	Formats        []string     `yaml:"formats"`
	Luminosity     float64      `yaml:"luminosity"`
	LuminosityUnit string       `yaml:"luminosity_unit"`
	RootSliceAxis  string       `yaml:"root_slice_axis"`
	Derived        []derivedDoc `yaml:"derived"`
}

type derivedDoc struct {
	Name           string   `yaml:"name"`
	Region         string   `yaml:"region"`
	Kind           string   `yaml:"kind"`
	Axes           []string `yaml:"axes"`
	PerSlice       []string `yaml:"per_slice"`
	DivideByWidths []string `yaml:"divide_by_widths"`
	Luminosity     bool     `yaml:"luminosity"`
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

// sections names each section type of the file in messages.
var sections = map[reflect.Type]string{
	reflect.TypeFor[fileDoc]():       "the top level",
	reflect.TypeFor[binningDoc]():    "binning",
	reflect.TypeFor[levelsDoc]():     "observables",
	reflect.TypeFor[sampleDoc]():     "a simulation sample",
	reflect.TypeFor[dataDoc]():       "data",
	reflect.TypeFor[bkgDoc]():        "a background",
	reflect.TypeFor[unfoldingDoc]():  "unfolding",
	reflect.TypeFor[uncertainDoc]():  "uncertainty",
	reflect.TypeFor[outputDoc]():     "output",
	reflect.TypeFor[derivedDoc]():    "a derived quantity",
	reflect.TypeFor[processingDoc](): "processing",
	reflect.TypeFor[validationDoc](): "validation",
	reflect.TypeFor[stressDoc]():     "a stress test",
	reflect.TypeFor[variationDoc]():  "a variation",
	reflect.TypeFor[changeDoc]():     "a variation's up or down change",
}

// lists describes the list sections in messages.
var lists = map[reflect.Type]string{
	reflect.TypeFor[[]sampleDoc]():    "a list of simulated samples (- file: ...)",
	reflect.TypeFor[[]bkgDoc]():       "a list of backgrounds (- name: ...)",
	reflect.TypeFor[[]stressDoc]():    "a list of stress tests (- name: ...)",
	reflect.TypeFor[[]variationDoc](): "a list of variations (- name: ...)",
	reflect.TypeFor[[]derivedDoc]():   "a list of derived quantities (- name: ...)",
}

var unmarshaler = reflect.TypeFor[yaml.Unmarshaler]()

// keyField returns the index of the field of struct type t whose key is
// key, or -1.
func keyField(t reflect.Type, key string) int {
	for i := range t.NumField() {
		if t.Field(i).Tag.Get("yaml") == key {
			return i
		}
	}
	return -1
}

func keysOf(t reflect.Type) []string {
	var keys []string
	for i := range t.NumField() {
		if tag := t.Field(i).Tag.Get("yaml"); tag != "" && tag != "-" {
			keys = append(keys, tag)
		}
	}
	return keys
}

// wantName describes the Go type t as the kind of value a key wants.
func wantName(t reflect.Type) string {
	if s, ok := lists[t]; ok {
		return s
	}
	switch t.Kind() {
	case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64,
		reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64:
		return "a whole number"
	case reflect.Float32, reflect.Float64:
		return "a number"
	case reflect.String:
		return "a string"
	case reflect.Bool:
		return "true or false"
	case reflect.Slice:
		return "a list"
	case reflect.Struct:
		return "a mapping (" + sections[t] + ")"
	}
	return t.String()
}

// kindName describes the YAML value n.
func kindName(n *yaml.Node) string {
	switch n.Kind {
	case yaml.MappingNode:
		return "a mapping"
	case yaml.SequenceNode:
		return "a list"
	}
	switch tag := n.ShortTag(); tag {
	case "!!str":
		return "a string"
	case "!!int":
		return "an integer"
	case "!!float":
		return "a number"
	case "!!bool":
		return "true or false"
	case "!!null":
		return "empty (null)"
	default:
		return "a " + strings.TrimPrefix(tag, "!!")
	}
}

// checkNode walks n against t, the Go type its value decodes into, the
// way the YAML library decodes it, and appends to es each unknown or
// repeated key and each value of the wrong kind. field is n's path.
func checkNode(es *Errors, file string, n *yaml.Node, t reflect.Type, field string) {
	if n.Kind == yaml.AliasNode {
		n = n.Alias
	}
	if t == reflect.TypeFor[iterationsDoc]() {
		if n != nil && n.Kind == yaml.ScalarNode && n.Value == "auto" {
			return
		}
		t = reflect.TypeFor[int]() // otherwise a count
	}
	if n == nil || reflect.PointerTo(t).Implements(unmarshaler) {
		return
	}
	if n.Kind == yaml.ScalarNode && n.ShortTag() == "!!null" {
		return // an empty value leaves the zero value
	}
	wrong := func() {
		e := &Error{File: file, Line: n.Line, Field: field}
		if n.Kind == yaml.ScalarNode {
			e.Msg = fmt.Sprintf("value %s is %s, want %s", n.Value, kindName(n), wantName(t))
		} else {
			e.Msg = fmt.Sprintf("the value is %s, want %s", kindName(n), wantName(t))
		}
		*es = append(*es, e)
	}
	switch t.Kind() {
	case reflect.Struct:
		if n.Kind != yaml.MappingNode {
			wrong()
			return
		}
		checkMapping(es, file, n, t, field, map[string]int{})
	case reflect.Slice:
		if n.Kind != yaml.SequenceNode {
			wrong()
			return
		}
		for i, c := range n.Content {
			checkNode(es, file, c, t.Elem(), fmt.Sprintf("%s[%d]", field, i))
		}
	default:
		// The YAML library truncates a number into an integer field
		// (2.5 becomes 2): an integer field takes only an integer.
		if n.Kind != yaml.ScalarNode || n.Decode(reflect.New(t).Interface()) != nil ||
			(wantName(t) == "a whole number" && n.ShortTag() != "!!int") {
			wrong()
		}
	}
}

// checkMapping checks the keys and values of the mapping n against the
// struct type t; seen holds the line of each key already given, across
// merged mappings (<<: *anchor).
func checkMapping(es *Errors, file string, n *yaml.Node, t reflect.Type, field string, seen map[string]int) {
	for i := 0; i+1 < len(n.Content); i += 2 {
		k, v := n.Content[i], n.Content[i+1]
		if k.Kind == yaml.ScalarNode && k.ShortTag() == "!!merge" {
			if v.Kind == yaml.AliasNode {
				v = v.Alias
			}
			merged := []*yaml.Node{v}
			if v != nil && v.Kind == yaml.SequenceNode {
				merged = v.Content
			}
			for _, m := range merged {
				if m != nil && m.Kind == yaml.AliasNode {
					m = m.Alias
				}
				if m == nil || m.Kind != yaml.MappingNode {
					*es = append(*es, &Error{File: file, Line: k.Line, Field: field, Msg: "a merge (<<) takes a mapping or a list of mappings"})
					continue
				}
				checkMapping(es, file, m, t, field, seen)
			}
			continue
		}
		j := keyField(t, k.Value)
		if k.Kind != yaml.ScalarNode || j < 0 {
			*es = append(*es, &Error{File: file, Line: k.Line, Field: k.Value,
				Msg: fmt.Sprintf("unknown key in %s (known keys: %s)", sections[t], strings.Join(keysOf(t), ", "))})
			continue
		}
		sub := k.Value
		if field != "" {
			sub = field + "." + k.Value
		}
		if line, dup := seen[k.Value]; dup {
			*es = append(*es, &Error{File: file, Line: k.Line, Field: sub, Msg: fmt.Sprintf("given twice (first on line %d); give each key once", line)})
			continue
		}
		seen[k.Value] = k.Line
		checkNode(es, file, v, t.Field(j).Type, sub)
	}
}

// syntaxError is a YAML syntax error as an Error of file, the line the
// library names kept apart from the message.
func syntaxError(file string, err error) *Error {
	e := &Error{File: file, Msg: strings.TrimPrefix(err.Error(), "yaml: "), Err: err}
	if rest, ok := strings.CutPrefix(e.Msg, "line "); ok {
		num, msg, ok := strings.Cut(rest, ": ")
		if l, err := strconv.Atoi(num); ok && err == nil {
			e.Line, e.Msg = l, msg
		}
	}
	return e
}

// parse decodes src strictly into the document structure and the node
// tree (kept for positions): the tree is checked against the structure
// by checkNode before it is decoded.
func parse(file string, src []byte) (*fileDoc, *yaml.Node, error) {
	dec := yaml.NewDecoder(bytes.NewReader(src))
	var root yaml.Node
	if err := dec.Decode(&root); err != nil {
		if errors.Is(err, io.EOF) {
			return nil, nil, &Error{File: file, Msg: "the file is empty"}
		}
		return nil, nil, syntaxError(file, err)
	}
	var extra yaml.Node
	if err := dec.Decode(&extra); err == nil {
		return nil, nil, &Error{File: file, Line: extra.Line, Msg: "a second YAML document (---) is not allowed"}
	} else if !errors.Is(err, io.EOF) {
		return nil, nil, syntaxError(file, err)
	}
	var es Errors
	for _, n := range root.Content {
		checkNode(&es, file, n, reflect.TypeFor[fileDoc](), "")
	}
	if len(es) > 0 {
		return nil, nil, es
	}
	var doc fileDoc
	if err := root.Decode(&doc); err != nil {
		// checkNode lets through only what decodes.
		return nil, nil, &Error{File: file, Msg: err.Error(), Err: err}
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
func schemeFrom(file, dir, field string, n *yaml.Node) (*binning.Scheme, string, error) {
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
		s, err := binning.DecodeNode(n, file)
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
