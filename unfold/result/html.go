package result

import (
	"bytes"
	"encoding/json"
	"fmt"
	"html/template"
	"math"
	"strconv"
	"strings"

	"github.com/desmear/desmear/binning"
)

// MaxReportRows is the largest number of rows of a per-bin table of
// report.html; larger tables are cut there (the CSV files hold every
// bin).
const MaxReportRows = 2000

// reportPage is what report.html shows.
type reportPage struct {
	Title    string
	Program  string
	Settings [][2]string
	Inputs   []reportInput
	Summary  [][2]string
	Plots    []reportPlot
	Tables   []reportTable
}

type reportInput struct {
	Role, Path, SHA256 string
	Bytes              int64
}

type reportPlot struct {
	Name, Caption, PNG string
	SVG                template.HTML
}

type reportTable struct {
	ID, Title, Note string
	Header          []string
	Rows            [][]string
}

// svgBody returns an SVG file without its XML declaration and comment,
// for inlining into HTML.
func svgBody(svg []byte) template.HTML {
	if i := bytes.Index(svg, []byte("<svg")); i >= 0 {
		svg = svg[i:]
	}
	return template.HTML(svg) // drawn by this program: trusted markup
}

// settingsRows returns the settings of r in the order of result.json.
func settingsRows(s Settings) [][2]string {
	data, err := json.Marshal(s)
	if err != nil {
		return nil
	}
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.UseNumber()
	var rows [][2]string
	dec.Token() // {
	for dec.More() {
		k, _ := dec.Token()
		var v any
		dec.Decode(&v)
		rows = append(rows, [2]string{fmt.Sprint(k), fmt.Sprint(v)})
	}
	return rows
}

// reportSummary returns the summary rows of r.
func reportSummary(r *Result) [][2]string {
	c := r.Check()
	det := len(r.Determined) - c.Undetermined
	rows := [][2]string{
		{"truth bins", fmt.Sprintf("%d (%d determined)", r.TruthBins, det)},
		{"reco bins", strconv.Itoa(r.RecoBins)},
		{"iterations", strconv.Itoa(r.Iterations)},
	}
	if r.StoppedBy != "" {
		rows[2][1] += " (stopped by " + r.StoppedBy + ")"
	}
	if c.HasData {
		rows = append(rows, [2]string{"folded chi-square", fmt.Sprintf("%.4g over %d reco bins", c.FoldedChi2, c.FoldedBins)})
	}
	rows = append(rows,
		[2]string{"truth bins not determined", strconv.Itoa(c.Undetermined)},
		[2]string{fmt.Sprintf("in-range bins with efficiency below %g", LowEfficiency), strconv.Itoa(c.LowEfficiency)})
	if r.Purity != nil {
		rows = append(rows, [2]string{fmt.Sprintf("in-range bins with purity below %g", LowPurity), strconv.Itoa(c.LowPurity)})
	}
	rows = append(rows, [2]string{"reco bins clipped", strconv.Itoa(c.Clipped)})
	if r.UncertaintyMethod != "" {
		rows = append(rows, [2]string{"uncertainty", r.UncertaintyMethod})
	}
	return rows
}

// reportTables returns the per-truth-bin and per-reco-bin tables of r.
func reportTables(r *Result) []reportTable {
	num := func(v float64) string { return strconv.FormatFloat(v, 'g', 6, 64) }
	truth := reportTable{ID: "truth-bins", Title: "Truth bins", Header: []string{"bin"}}
	if r.TruthBinning != nil {
		truth.Header = append(truth.Header, "label")
	}
	truth.Header = append(truth.Header, "estimate")
	if r.Uncertainty != nil {
		truth.Header = append(truth.Header, "uncertainty")
	}
	truth.Header = append(truth.Header, "efficiency")
	if r.Purity != nil {
		truth.Header = append(truth.Header, "purity", "stability")
	}
	opt := func(v []*float64, j int) string {
		if v[j] == nil {
			return "–"
		}
		return num(*v[j])
	}
	for j := range r.Estimate {
		if j == MaxReportRows {
			truth.Note = fmt.Sprintf("The first %d of %d bins; every bin is in %s.", MaxReportRows, len(r.Estimate), CSVFile)
			break
		}
		row := []string{strconv.Itoa(j)}
		if r.TruthBinning != nil {
			row = append(row, r.TruthBinning.Labels[j])
		}
		est := num(r.Estimate[j])
		if !r.Determined[j] {
			est = "not determined"
		}
		row = append(row, est)
		if r.Uncertainty != nil {
			row = append(row, num(r.Uncertainty[j]))
		}
		row = append(row, num(r.Efficiency[j]))
		if r.Purity != nil {
			row = append(row, opt(r.Purity, j), opt(r.Stability, j))
		}
		truth.Rows = append(truth.Rows, row)
	}
	tables := []reportTable{truth}
	if r.Data != nil {
		reco := reportTable{ID: "reco-bins", Title: "Reco bins: data against the folded estimate", Header: []string{"bin"}}
		if r.RecoBinning != nil {
			reco.Header = append(reco.Header, "label")
		}
		reco.Header = append(reco.Header, "data", "σ", "folded", "pull")
		pulls := r.Pulls()
		for i := range r.Data {
			if i == MaxReportRows {
				reco.Note = fmt.Sprintf("The first %d of %d bins; every bin is in %s.", MaxReportRows, len(r.Data), RecoBinsFile)
				break
			}
			row := []string{strconv.Itoa(i)}
			if r.RecoBinning != nil {
				row = append(row, r.RecoBinning.Labels[i])
			}
			row = append(row, num(r.Data[i]), num(math.Sqrt(r.PullVariance(i))), num(r.Folded[i]), fmt.Sprintf("%+.2f", pulls[i]))
			reco.Rows = append(reco.Rows, row)
		}
		tables = append(tables, reco)
	}
	return tables
}

// writeHTML writes report.html for r with the plots given and their
// SVG files.
func writeHTML(f *Folder, r *Result, _ *binning.Scheme, plots []Plot, svgs [][]byte) error {
	page := reportPage{Title: "Unfolding result", Program: strings.TrimSpace(r.Program.Name + " " + r.Program.Version), Settings: settingsRows(r.Settings),
		Summary: reportSummary(r), Tables: reportTables(r)}
	if r.Analysis != nil && r.Analysis.Title != "" {
		page.Title = r.Analysis.Title
	}
	for _, in := range r.Inputs {
		page.Inputs = append(page.Inputs, reportInput{Role: in.Role, Path: in.Path, SHA256: in.SHA256, Bytes: in.Bytes})
	}
	for k, p := range plots {
		page.Plots = append(page.Plots, reportPlot{Name: p.Name, Caption: p.Caption, PNG: PlotFile(p.Name, "png"), SVG: svgBody(svgs[k])})
	}
	var buf bytes.Buffer
	if err := reportTemplate.Execute(&buf, page); err != nil {
		return err
	}
	return f.WriteFile(ReportFile, buf.Bytes())
}

var reportTemplate = template.Must(template.New("report").Parse(`<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{{.Title}}</title>
<style>
body { font-family: "Liberation Sans", Arial, Helvetica, sans-serif; margin: 1.5em auto; max-width: 70em; padding: 0 1em; color: #111; line-height: 1.4; }
h1 { font-size: 1.6em; margin-bottom: 0.2em; }
h2 { font-size: 1.25em; margin-top: 1.6em; border-bottom: 1px solid #999; }
table { border-collapse: collapse; margin: 0.5em 0; font-size: 0.9em; }
th, td { border: 1px solid #bbb; padding: 0.15em 0.5em; text-align: left; vertical-align: top; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
code { font-size: 0.85em; word-break: break-all; }
nav a { margin-right: 1em; }
.plots { display: grid; grid-template-columns: repeat(auto-fill, minmax(28em, 1fr)); gap: 1.2em; }
figure { margin: 0; }
figure svg { width: 100%; height: auto; display: block; border: 1px solid #ddd; }
figcaption { font-size: 0.85em; margin-top: 0.3em; }
.bins { max-height: 30em; overflow: auto; display: inline-block; }
</style>
</head>
<body>
<h1>{{.Title}}</h1>
<p>Written by {{.Program}}.</p>
<nav><a href="#summary">Summary</a><a href="#settings">Settings</a><a href="#inputs">Inputs</a><a href="#plots">Plots</a>{{range .Tables}}<a href="#{{.ID}}">{{.Title}}</a>{{end}}</nav>
<h2 id="summary">Summary</h2>
<table>{{range .Summary}}<tr><th>{{index . 0}}</th><td>{{index . 1}}</td></tr>{{end}}</table>
<h2 id="settings">Settings</h2>
<table>{{range .Settings}}<tr><th>{{index . 0}}</th><td>{{index . 1}}</td></tr>{{end}}</table>
<h2 id="inputs">Inputs</h2>
<table><tr><th>role</th><th>file</th><th>bytes</th><th>SHA-256</th></tr>
{{range .Inputs}}<tr><td>{{.Role}}</td><td><code>{{.Path}}</code></td><td class="num">{{.Bytes}}</td><td><code>{{.SHA256}}</code></td></tr>
{{end}}</table>
<h2 id="plots">Plots</h2>
<div class="plots">
{{range .Plots}}<figure id="plot-{{.Name}}">
{{.SVG}}
<figcaption>{{.Caption}} (<a href="{{.PNG}}">PNG</a>)</figcaption>
</figure>
{{end}}</div>
{{range .Tables}}<h2 id="{{.ID}}">{{.Title}}</h2>
{{if .Note}}<p>{{.Note}}</p>{{end}}<div class="bins"><table>
<tr>{{range .Header}}<th>{{.}}</th>{{end}}</tr>
{{range .Rows}}<tr>{{range .}}<td>{{.}}</td>{{end}}</tr>
{{end}}</table></div>
{{end}}</body>
</html>
`))
