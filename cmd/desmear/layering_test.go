package main

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os/exec"
	"slices"
	"strings"
	"testing"
)

// modulePath is the import path of this module.
const modulePath = "github.com/desmear/desmear"

// layerRule refuses some imports to some packages. A pattern is a
// package path relative to the module ("unfold"), a subtree of it
// ("unfold/inputs/..."), the whole module ("..."), or, when its first
// element has a dot, a path outside the module ("go-hep.org/x/hep/...").
type layerRule struct {
	why        string
	pkgs       []string // the packages the rule applies to
	notPkgs    []string // ... except these
	imports    []string // the imports they may not have
	notImports []string // ... except these
	tests      bool     // whether the imports of their test files count too
}

// The file-format and job packages and the format libraries that the
// method packages may not import.
var formatPackages = []string{
	"unfold/inputs/...", "unfold/result/...", "unfold/response/...", "unfold/analysis/...", "unfold/demo/...",
	"unfold/internal/rootio/...", "unfold/internal/eventfile/...", "unfold/internal/atomicfile/...",
	"go-hep.org/x/hep/...", "github.com/parquet-go/...", "go.yaml.in/yaml/...", "gopkg.in/yaml.v3",
}

// layerRules is the layering of the module, one rule a line. A rule
// whose packages do not exist (yet) checks nothing.
var layerRules = []layerRule{
	{why: "binning imports nothing of this module", pkgs: []string{"binning/..."}, imports: []string{"..."}, notImports: []string{"binning/..."}, tests: true},
	{why: "binning imports no sparse-matrix library", pkgs: []string{"binning/..."}, imports: []string{"github.com/james-bowman/sparse/..."}, tests: true},
	{why: "sparse imports nothing of this module", pkgs: []string{"sparse/..."}, imports: []string{"..."}, notImports: []string{"sparse/..."}, tests: true},
	{why: "the method packages read and write no files", pkgs: []string{"unfold", "unfold/methods/..."}, imports: formatPackages},
	{why: "only the command line imports the command line", pkgs: []string{"..."}, notPkgs: []string{"cmd/..."}, imports: []string{"cmd/..."}, tests: true},
	{why: "only the command line (and the demo's own tests) imports the demo", pkgs: []string{"..."}, notPkgs: []string{"cmd/...", "unfold/demo/..."}, imports: []string{"unfold/demo/..."}, tests: true},
}

// listedPackage is the part of `go list -json` output the rules read.
type listedPackage struct {
	ImportPath                         string
	Imports, TestImports, XTestImports []string
}

// patternPath returns the import path or subtree ("/..." suffix) a
// pattern stands for.
func patternPath(p string) string {
	if p == "..." {
		return modulePath + "/..."
	}
	if first, _, _ := strings.Cut(p, "/"); strings.Contains(first, ".") {
		return p
	}
	return modulePath + "/" + p
}

func matchAny(patterns []string, path string) bool {
	for _, p := range patterns {
		full := patternPath(p)
		if base, ok := strings.CutSuffix(full, "/..."); ok {
			if path == base || strings.HasPrefix(path, base+"/") {
				return true
			}
		} else if path == full {
			return true
		}
	}
	return false
}

// layerViolations returns one line for each import of pkgs that a rule
// refuses, in the order of pkgs and rules.
func layerViolations(rules []layerRule, pkgs []listedPackage) []string {
	var out []string
	for _, p := range pkgs {
		for _, r := range rules {
			if !matchAny(r.pkgs, p.ImportPath) || matchAny(r.notPkgs, p.ImportPath) {
				continue
			}
			imports := map[string][]string{"": p.Imports}
			if r.tests {
				imports["test files"] = slices.Concat(p.TestImports, p.XTestImports)
			}
			for _, kind := range []string{"", "test files"} {
				for _, imp := range imports[kind] {
					if imp == p.ImportPath || !matchAny(r.imports, imp) || matchAny(r.notImports, imp) {
						continue
					}
					where := p.ImportPath
					if kind != "" {
						where += " (" + kind + ")"
					}
					out = append(out, fmt.Sprintf("%s imports %s: %s", where, imp, r.why))
				}
			}
		}
	}
	return out
}

// TestLayering checks the imports of every package of the module
// against layerRules.
func TestLayering(t *testing.T) {
	if testing.Short() {
		t.Skip("runs go list")
	}
	gocmd, err := exec.LookPath("go")
	if err != nil {
		t.Skip("no go command:", err)
	}
	cmd := exec.Command(gocmd, "list", "-json", modulePath+"/...")
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("go list: %v\n%s", err, stderr.Bytes())
	}
	var pkgs []listedPackage
	dec := json.NewDecoder(bytes.NewReader(out))
	for {
		var p listedPackage
		if err := dec.Decode(&p); errors.Is(err, io.EOF) {
			break
		} else if err != nil {
			t.Fatal(err)
		}
		pkgs = append(pkgs, p)
	}
	// The listing is the module's: a rule over no package checks nothing.
	for _, want := range []string{"binning", "sparse", "unfold", "cmd/desmear"} {
		if !slices.ContainsFunc(pkgs, func(p listedPackage) bool { return p.ImportPath == patternPath(want) }) {
			t.Fatalf("go list did not list %s among %d packages", want, len(pkgs))
		}
	}
	for _, v := range layerViolations(layerRules, pkgs) {
		t.Error(v)
	}
}

// The checker on an invented import graph: each rule is broken once, by
// a package's code or its tests, beside imports that are allowed.
func TestLayerViolations(t *testing.T) {
	m := func(p string) string { return modulePath + "/" + p }
	pkgs := []listedPackage{
		{ImportPath: m("binning"), Imports: []string{"fmt", "go.yaml.in/yaml/v3", m("unfold/result")}, XTestImports: []string{m("binning")}},
		{ImportPath: m("sparse"), Imports: []string{"gonum.org/v1/gonum/mat"}, TestImports: []string{m("sparse/sparsetest"), m("binning")}},
		{ImportPath: m("sparse/sparsetest"), Imports: []string{"math"}, XTestImports: []string{m("sparse")}},
		{ImportPath: m("unfold"), Imports: []string{m("binning"), m("sparse")}, TestImports: []string{m("unfold/demo")}},
		{ImportPath: m("unfold/methods/bayes"), Imports: []string{m("unfold"), "go-hep.org/x/hep/groot", m("unfold/internal/atomicfile")}},
		{ImportPath: m("unfold/methodsx"), Imports: []string{m("unfold/result")}},
		{ImportPath: m("unfold/result"), Imports: []string{m("unfold"), m("cmd/desmear/internal/flagval")}},
		{ImportPath: m("unfold/demo"), Imports: []string{m("unfold/result")}, TestImports: []string{m("unfold/analysis")}, XTestImports: []string{m("unfold/demo")}},
		{ImportPath: m("cmd/desmear"), Imports: []string{m("unfold/demo"), m("cmd/desmear/internal/flagval")}},
	}
	want := []string{
		m("binning") + " imports " + m("unfold/result") + ": binning imports nothing of this module",
		m("sparse") + " (test files) imports " + m("binning") + ": sparse imports nothing of this module",
		m("unfold") + " (test files) imports " + m("unfold/demo") + ": only the command line (and the demo's own tests) imports the demo",
		m("unfold/methods/bayes") + " imports go-hep.org/x/hep/groot: the method packages read and write no files",
		m("unfold/methods/bayes") + " imports " + m("unfold/internal/atomicfile") + ": the method packages read and write no files",
		m("unfold/result") + " imports " + m("cmd/desmear/internal/flagval") + ": only the command line imports the command line",
	}
	got := layerViolations(layerRules, pkgs)
	if !slices.Equal(got, want) {
		t.Errorf("violations:\n%s\nwant:\n%s", strings.Join(got, "\n"), strings.Join(want, "\n"))
	}
	// The packages that break no rule pass alone ("unfold/methodsx" is
	// not under unfold/methods).
	clean := []listedPackage{pkgs[2], pkgs[5], pkgs[7], pkgs[8]}
	if got := layerViolations(layerRules, clean); len(got) > 0 {
		t.Errorf("clean graph: %q", got)
	}
}
