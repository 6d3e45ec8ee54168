package binning

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"strconv"

	"go.yaml.in/yaml/v3"
)

// Error is a problem in a YAML scheme description: the file, the line
// and column (1-based, 0 if unknown), the field (a path such as
// "regions[0].axes[1].edges_by_bin[2]") and what is wrong.
type Error struct {
	File         string
	Line, Column int
	Field        string
	Msg          string
}

func (e *Error) Error() string {
	var b bytes.Buffer
	b.WriteString(e.File)
	if e.Line > 0 {
		fmt.Fprintf(&b, ":%d", e.Line)
		if e.Column > 0 {
			fmt.Fprintf(&b, ":%d", e.Column)
		}
	}
	b.WriteString(": ")
	if e.Field != "" {
		b.WriteString(e.Field)
		b.WriteString(": ")
	}
	b.WriteString(e.Msg)
	return b.String()
}

// ReadFile reads and decodes the YAML scheme in the file at path.
// Errors opening or reading the file are returned as they come from the
// os package (test them with errors.Is(err, fs.ErrNotExist) and the like);
// problems in the content are *Error values.
func ReadFile(path string) (*Scheme, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return Decode(f, path)
}

// Decode reads a YAML scheme description from r, strictly: an unknown
// key, a wrong type, a missing field, non-increasing or non-finite edges,
// duplicate region or axis names, an edges_by_bin list whose length does
// not match the axis before, or an empty axis is an *Error naming
// filename, the line and the field. The format is
//
//	description: free text (optional)
//	regions:
//	  - name: central
//	    axes:
//	      - {name: y, edges: [0, 0.5, 1.0, 1.5], overflow: true}
//	      - name: pt
//	        unit: GeV
//	        underflow: true
//	        overflow: true
//	        edges_by_bin:          # one edge list per bin of the axis before it
//	          - [20, 30, 45, 70, 110]
//	          - [20, 30, 50, 90]
//	          - [20, 40, 80]
//
// underflow and overflow default to false; each axis has exactly one of
// edges and edges_by_bin.
func Decode(r io.Reader, filename string) (*Scheme, error) {
	data, err := io.ReadAll(io.LimitReader(r, MaxFileBytes+1))
	if err != nil {
		return nil, fmt.Errorf("binning: reading %s: %w", filename, err)
	}
	if len(data) > MaxFileBytes {
		return nil, &Error{File: filename, Msg: fmt.Sprintf("larger than %d MiB, the limit for a scheme file; is it a binning file?", MaxFileBytes>>20)}
	}
	dec := yaml.NewDecoder(bytes.NewReader(data))
	var doc, extra yaml.Node
	if err := dec.Decode(&doc); err != nil && !errors.Is(err, io.EOF) {
		return nil, &Error{File: filename, Line: yamlErrorLine(err), Msg: "not valid YAML: " + err.Error()}
	}
	if err := dec.Decode(&extra); err == nil {
		return nil, &Error{File: filename, Line: extra.Line, Msg: "a second YAML document (---) is not allowed; give one scheme per file"}
	} else if !errors.Is(err, io.EOF) {
		return nil, &Error{File: filename, Line: yamlErrorLine(err), Msg: "not valid YAML: " + err.Error()}
	}
	return DecodeNode(&doc, filename)
}

// DecodeNode decodes the scheme in n, a YAML mapping in the format
// Decode reads (or a document node holding one), for a scheme written
// inside a larger YAML file. It checks what Decode checks; an *Error
// names file, the line and column in n's tree and the field below n.
func DecodeNode(n *yaml.Node, file string) (*Scheme, error) {
	d := decoder{file: file}
	if n == nil {
		return nil, &Error{File: file, Msg: fmt.Sprintf("no scheme; a scheme needs a list of regions under the key %q", "regions")}
	}
	if n.Kind == yaml.DocumentNode || n.Kind == 0 {
		if len(n.Content) == 0 {
			return nil, d.errf(n, "", "the file is empty; a scheme needs a list of regions under the key %q", "regions")
		}
		n = n.Content[0]
	}
	return d.scheme(n)
}

// yamlErrorLine extracts the line number from a yaml.v3 syntax error
// message ("yaml: line 3: ..."), or returns 0.
func yamlErrorLine(err error) int {
	var line int
	if _, e := fmt.Sscanf(err.Error(), "yaml: line %d:", &line); e == nil {
		return line
	}
	return 0
}

// Limits on what a scheme file may ask for, checked before the memory is
// taken: the file's size, its regions, and its edges counted every time
// a list is used (a list reused through a YAML alias counts each time).
// The bins are limited by MaxBins.
const (
	MaxFileBytes = 64 << 20
	MaxRegions   = 1 << 16
	MaxEdges     = 1 << 20
)

type decoder struct {
	file    string
	nedges  int                      // edges decoded so far
	decoded map[*yaml.Node][]float64 // edge lists by node, for aliases
}

func (d *decoder) errf(n *yaml.Node, field, format string, a ...any) error {
	return &Error{File: d.file, Line: n.Line, Column: n.Column, Field: field, Msg: fmt.Sprintf(format, a...)}
}

// fields checks that n is a mapping with only the allowed keys and
// returns the value node of each key present.
func (d *decoder) fields(n *yaml.Node, field string, allowed ...string) (map[string]*yaml.Node, error) {
	if n.Kind == yaml.AliasNode {
		n = n.Alias
	}
	if n.Kind != yaml.MappingNode {
		return nil, d.errf(n, field, "expected a mapping (key: value pairs), found %s", kindName(n))
	}
	out := make(map[string]*yaml.Node)
	for i := 0; i+1 < len(n.Content); i += 2 {
		k, v := n.Content[i], n.Content[i+1]
		if k.Kind != yaml.ScalarNode {
			return nil, d.errf(k, field, "expected a key name, found %s", kindName(k))
		}
		sub := joinField(field, k.Value)
		if !slices.Contains(allowed, k.Value) {
			return nil, d.errf(k, sub, "unknown key %q; the keys allowed here are %s", k.Value, quoteList(allowed))
		}
		if _, dup := out[k.Value]; dup {
			return nil, d.errf(k, sub, "key %q given twice", k.Value)
		}
		if v.Kind == yaml.AliasNode {
			v = v.Alias
		}
		out[k.Value] = v
	}
	return out, nil
}

func joinField(parent, key string) string {
	if parent == "" {
		return key
	}
	return parent + "." + key
}

func quoteList(s []string) string {
	var b bytes.Buffer
	for i, v := range s {
		if i > 0 {
			b.WriteString(", ")
		}
		b.WriteString(strconv.Quote(v))
	}
	return b.String()
}

func kindName(n *yaml.Node) string {
	switch n.Kind {
	case yaml.MappingNode:
		return "a mapping"
	case yaml.SequenceNode:
		if len(n.Content) == 0 {
			return "an empty list"
		}
		return "a list"
	case yaml.ScalarNode:
		if n.Tag == "!!null" {
			return "nothing (null)"
		}
		return fmt.Sprintf("the value %q", n.Value)
	}
	return "an unexpected YAML node"
}

func (d *decoder) scheme(n *yaml.Node) (*Scheme, error) {
	f, err := d.fields(n, "", "description", "regions")
	if err != nil {
		return nil, err
	}
	if v, ok := f["description"]; ok {
		if _, err := d.str(v, "description"); err != nil {
			return nil, err
		}
	}
	rn, ok := f["regions"]
	if !ok {
		return nil, d.errf(n, "regions", "missing; a scheme needs a list of regions")
	}
	if rn.Kind != yaml.SequenceNode || len(rn.Content) == 0 {
		return nil, d.errf(rn, "regions", "expected a non-empty list of regions, found %s", kindName(rn))
	}
	if len(rn.Content) > MaxRegions {
		return nil, d.errf(rn, "regions", "%d regions; at most %d are supported", len(rn.Content), MaxRegions)
	}
	regions := make([]*Region, 0, len(rn.Content))
	names := make(map[string]int)
	units := make(map[string]string)
	for i, c := range rn.Content {
		field := fmt.Sprintf("regions[%d]", i)
		reg, nameNode, err := d.region(c, field, units)
		if err != nil {
			return nil, err
		}
		if j, dup := names[reg.name]; dup {
			return nil, d.errf(nameNode, field+".name", "region name %q already used by regions[%d]; give every region its own name", reg.name, j)
		}
		names[reg.name] = i
		regions = append(regions, reg)
	}
	s, err := NewScheme(regions...)
	if err != nil {
		return nil, &Error{File: d.file, Line: rn.Line, Column: rn.Column, Field: "regions", Msg: err.Error()}
	}
	return s, nil
}

func (d *decoder) str(n *yaml.Node, field string) (string, error) {
	if n.Kind != yaml.ScalarNode || n.Tag == "!!null" {
		return "", d.errf(n, field, "expected a text value, found %s", kindName(n))
	}
	return n.Value, nil
}

func (d *decoder) region(n *yaml.Node, field string, units map[string]string) (*Region, *yaml.Node, error) {
	f, err := d.fields(n, field, "name", "axes")
	if err != nil {
		return nil, nil, err
	}
	nn, ok := f["name"]
	if !ok {
		return nil, nil, d.errf(n, field+".name", "missing; every region needs a name")
	}
	name, err := d.str(nn, field+".name")
	if err != nil {
		return nil, nil, err
	}
	if name == "" {
		return nil, nil, d.errf(nn, field+".name", "empty; every region needs a name")
	}
	an, ok := f["axes"]
	if !ok {
		return nil, nil, d.errf(n, field+".axes", "missing; region %q needs a list of 1 to %d axes", name, MaxAxes)
	}
	if an.Kind != yaml.SequenceNode || len(an.Content) == 0 {
		return nil, nil, d.errf(an, field+".axes", "expected a non-empty list of axes, found %s", kindName(an))
	}
	if len(an.Content) > MaxAxes {
		return nil, nil, d.errf(an, field+".axes", "%d axes; at most %d are supported", len(an.Content), MaxAxes)
	}
	axes := make([]*Axis, len(an.Content))
	for k, c := range an.Content {
		af := fmt.Sprintf("%s.axes[%d]", field, k)
		a, nameNode, byNode, err := d.axis(c, af)
		if err != nil {
			return nil, nil, err
		}
		for j, b := range axes[:k] {
			if b.name == a.name {
				return nil, nil, d.errf(nameNode, af+".name", "axis name %q already used by axes[%d] of region %q", a.name, j, name)
			}
		}
		if u, seen := units[a.name]; seen && u != a.unit {
			return nil, nil, d.errf(nameNode, af+".unit", "axis %q has unit %q here but %q in an earlier region; use one unit per observable", a.name, a.unit, u)
		}
		units[a.name] = a.unit
		if a.ByBin() {
			bf := af + ".edges_by_bin"
			if k == 0 {
				return nil, nil, d.errf(byNode, bf, "the first axis of a region cannot have edges by bin (there is no axis before it); use edges")
			}
			p := axes[k-1]
			if p.ByBin() {
				return nil, nil, d.errf(byNode, bf, "the axis before (%q) has edges by bin itself; an edges_by_bin axis must follow an axis with plain edges", p.name)
			}
			if len(a.byBin) != len(p.edges)-1 {
				return nil, nil, d.errf(byNode, bf, "%d edge lists, but the axis before (%q) has %d bins; give one list per bin of %q", len(a.byBin), p.name, len(p.edges)-1, p.name)
			}
		}
		axes[k] = a
	}
	reg, err := NewRegion(name, axes...)
	if err != nil {
		return nil, nil, d.errf(n, field, "%v", err)
	}
	return reg, nn, nil
}

func (d *decoder) axis(n *yaml.Node, field string) (a *Axis, nameNode, byNode *yaml.Node, err error) {
	f, err := d.fields(n, field, "name", "unit", "edges", "edges_by_bin", "underflow", "overflow")
	if err != nil {
		return nil, nil, nil, err
	}
	nameNode, ok := f["name"]
	if !ok {
		return nil, nil, nil, d.errf(n, field+".name", "missing; every axis needs a name")
	}
	name, err := d.str(nameNode, field+".name")
	if err != nil {
		return nil, nil, nil, err
	}
	if name == "" {
		return nil, nil, nil, d.errf(nameNode, field+".name", "empty; every axis needs a name")
	}
	ax := &Axis{name: name}
	if u, ok := f["unit"]; ok {
		if ax.unit, err = d.str(u, field+".unit"); err != nil {
			return nil, nil, nil, err
		}
	}
	for _, key := range []string{"underflow", "overflow"} {
		v, ok := f[key]
		if !ok {
			continue
		}
		var b bool
		if v.Kind != yaml.ScalarNode || v.Decode(&b) != nil {
			return nil, nil, nil, d.errf(v, field+"."+key, "expected true or false, found %s", kindName(v))
		}
		if key == "underflow" {
			ax.underflow = b
		} else {
			ax.overflow = b
		}
	}
	en, hasE := f["edges"]
	bn, hasB := f["edges_by_bin"]
	switch {
	case hasE && hasB:
		return nil, nil, nil, d.errf(bn, field+".edges_by_bin", "axis %q has both edges and edges_by_bin; give exactly one", name)
	case !hasE && !hasB:
		return nil, nil, nil, d.errf(n, field+".edges", "missing; axis %q needs edges (or edges_by_bin, one list per bin of the axis before it)", name)
	case hasE:
		if ax.edges, err = d.edges(en, field+".edges"); err != nil {
			return nil, nil, nil, err
		}
	default:
		bf := field + ".edges_by_bin"
		if bn.Kind != yaml.SequenceNode || len(bn.Content) == 0 {
			return nil, nil, nil, d.errf(bn, bf, "expected a non-empty list of edge lists, found %s", kindName(bn))
		}
		ax.byBin = make([][]float64, len(bn.Content))
		for i, c := range bn.Content {
			if ax.byBin[i], err = d.edges(c, fmt.Sprintf("%s[%d]", bf, i)); err != nil {
				return nil, nil, nil, err
			}
		}
	}
	return ax, nameNode, bn, nil
}

// edges decodes one edge list and checks it.
func (d *decoder) edges(n *yaml.Node, field string) ([]float64, error) {
	if n.Kind == yaml.AliasNode {
		n = n.Alias
	}
	if n.Kind != yaml.SequenceNode {
		return nil, d.errf(n, field, "expected a list of numbers, found %s", kindName(n))
	}
	if len(n.Content) < 2 {
		return nil, d.errf(n, field, "%d edge(s): an axis needs at least two edges (one bin); an empty axis has no bins", len(n.Content))
	}
	if d.nedges += len(n.Content); d.nedges > MaxEdges {
		return nil, d.errf(n, field, "more than %d edges in the scheme (a list reused through a YAML alias counts each time); at most %d are supported", MaxEdges, MaxEdges)
	}
	if e, ok := d.decoded[n]; ok { // a list reused through an alias
		return slices.Clone(e), nil
	}
	e := make([]float64, len(n.Content))
	for i, c := range n.Content {
		var v float64
		if c.Kind != yaml.ScalarNode || c.Decode(&v) != nil {
			return nil, d.errf(c, fmt.Sprintf("%s[%d]", field, i), "expected a number, found %s", kindName(c))
		}
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, d.errf(c, fmt.Sprintf("%s[%d]", field, i), "edge %v is not a finite number; under- and overflow are switched on with underflow: true and overflow: true", v)
		}
		if i > 0 && !(v > e[i-1]) {
			return nil, d.errf(c, fmt.Sprintf("%s[%d]", field, i), "edges not strictly increasing: %v follows %v; list the edges in increasing order without repeats", v, e[i-1])
		}
		e[i] = v
	}
	if d.decoded == nil {
		d.decoded = map[*yaml.Node][]float64{}
	}
	d.decoded[n] = e
	return slices.Clone(e), nil
}

// WriteYAML writes the scheme in the format Decode reads, with every edge
// in the shortest form that reads back exactly.
func (s *Scheme) WriteYAML(w io.Writer) error {
	var b bytes.Buffer
	b.WriteString("regions:\n")
	for _, reg := range s.regions {
		fmt.Fprintf(&b, "  - name: %s\n    axes:\n", yamlString(reg.name))
		for _, a := range reg.axes {
			fmt.Fprintf(&b, "      - name: %s\n", yamlString(a.name))
			if a.unit != "" {
				fmt.Fprintf(&b, "        unit: %s\n", yamlString(a.unit))
			}
			if a.underflow {
				b.WriteString("        underflow: true\n")
			}
			if a.overflow {
				b.WriteString("        overflow: true\n")
			}
			if a.byBin == nil {
				fmt.Fprintf(&b, "        edges: %s\n", yamlEdges(a.edges))
				continue
			}
			b.WriteString("        edges_by_bin:\n")
			for _, e := range a.byBin {
				fmt.Fprintf(&b, "          - %s\n", yamlEdges(e))
			}
		}
	}
	_, err := w.Write(b.Bytes())
	return err
}

func yamlString(s string) string {
	out, err := yaml.Marshal(s)
	if err != nil {
		return strconv.Quote(s)
	}
	return string(bytes.TrimRight(out, "\n"))
}

func yamlEdges(e []float64) string {
	var b bytes.Buffer
	b.WriteByte('[')
	for i, v := range e {
		if i > 0 {
			b.WriteString(", ")
		}
		b.WriteString(strconv.FormatFloat(v, 'g', -1, 64))
	}
	b.WriteByte(']')
	return b.String()
}
