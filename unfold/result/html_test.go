package result

import (
	"encoding/xml"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/desmear/desmear/unfold/inputs"
)

// element is a parsed HTML element with its attributes and children.
type element struct {
	name     string
	attr     map[string]string
	children []*element
	text     string
}

// parseHTML parses an HTML page with the lenient XML reader (HTML void
// elements closed automatically, HTML entities known).
func parseHTML(t *testing.T, path string) *element {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	dec := xml.NewDecoder(f)
	dec.Strict, dec.AutoClose, dec.Entity = false, xml.HTMLAutoClose, xml.HTMLEntity
	root := &element{name: "#document"}
	stack := []*element{root}
	for {
		tok, err := dec.Token()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("%s: %v", path, err)
		}
		top := stack[len(stack)-1]
		switch tok := tok.(type) {
		case xml.StartElement:
			e := &element{name: strings.ToLower(tok.Name.Local), attr: map[string]string{}}
			for _, a := range tok.Attr {
				e.attr[a.Name.Local] = a.Value
			}
			top.children = append(top.children, e)
			stack = append(stack, e)
		case xml.EndElement:
			if len(stack) > 1 {
				stack = stack[:len(stack)-1]
			}
		case xml.CharData:
			top.text += string(tok)
		}
	}
	return root
}

// all returns the elements named name below e.
func (e *element) all(name string) []*element {
	var out []*element
	for _, c := range e.children {
		if c.name == name {
			out = append(out, c)
		}
		out = append(out, c.all(name)...)
	}
	return out
}

// byID returns the element with the id, or nil.
func (e *element) byID(id string) *element {
	for _, c := range e.children {
		if c.attr["id"] == id {
			return c
		}
		if f := c.byID(id); f != nil {
			return f
		}
	}
	return nil
}

// report.html is one self-contained page: no script, no stylesheet or
// image loaded from elsewhere; every plot is inline SVG with a link to
// its PNG, which exists; the summary, settings and inputs are there, and
// the tables have one row per bin.
func TestReportHTML(t *testing.T) {
	r, s := plotsResult(t)
	r.Inputs = append(r.Inputs, inputs.File{Role: "response", Path: "A.csv", Bytes: 12, SHA256: strings.Repeat("ab", 32)})
	dir, _ := writeFolder(t, t.TempDir(), "r", r, s)
	page := parseHTML(t, filepath.Join(dir, ReportFile))
	if n := len(page.all("script")) + len(page.all("link")) + len(page.all("iframe")) + len(page.all("img")); n != 0 {
		t.Errorf("%d scripts, links, frames or images", n)
	}
	for _, a := range page.all("a") {
		if href := a.attr["href"]; strings.Contains(href, "://") {
			t.Errorf("external link %s", href)
		}
	}
	for _, p := range Plots(r, s) {
		fig := page.byID("plot-" + p.Name)
		if fig == nil || len(fig.all("svg")) != 1 {
			t.Fatalf("plot %s is not inline", p.Name)
		}
		links := fig.all("a")
		if len(links) != 1 {
			t.Fatalf("plot %s has %d links", p.Name, len(links))
		}
		if _, err := os.Stat(filepath.Join(dir, links[0].attr["href"])); err != nil {
			t.Errorf("plot %s: %v", p.Name, err)
		}
	}
	for _, id := range []string{"summary", "settings", "inputs", "truth-bins", "reco-bins"} {
		if page.byID(id) == nil {
			t.Fatalf("no section %s", id)
		}
	}
	tables := page.all("table")
	if len(tables) != 5 {
		t.Fatalf("%d tables, want summary, settings, inputs, truth and reco bins", len(tables))
	}
	if got := len(tables[3].all("tr")); got != 1+r.TruthBins {
		t.Errorf("truth table has %d rows, want %d", got, 1+r.TruthBins)
	}
	if got := len(tables[4].all("tr")); got != 1+r.RecoBins {
		t.Errorf("reco table has %d rows, want %d", got, 1+r.RecoBins)
	}
	if tr := tables[2].all("tr"); len(tr) != 1+len(r.Inputs) || !strings.Contains(tr[len(tr)-1].all("code")[1].text, r.Inputs[len(r.Inputs)-1].SHA256) {
		t.Errorf("inputs table %d rows", len(tr))
	}
	if tr := tables[1].all("tr"); len(tr) == 0 || tr[0].all("th")[0].text != "method" {
		t.Errorf("settings table does not start with the method")
	}
}
