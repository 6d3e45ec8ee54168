package result

import (
	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold/result/figure"
)

func init() {
	Register(Writer{Name: ReportFormat, Default: true, Write: writeReport})
}

// ReportFormat is the name of the format of the plots and the report.
const ReportFormat = "report"

// PlotFile returns the file of plot name in format (figure.PNG or
// figure.SVG), relative to the result folder.
func PlotFile(name, format string) string { return PlotsFolder + "/" + name + "." + format }

// writeReport writes every plot of Plots as PNG and SVG into the plots
// folder, and report.html showing them.
func writeReport(f *Folder, r *Result, s *binning.Scheme) ([]string, error) {
	var files []string
	plots := Plots(r, s)
	svgs := make([][]byte, len(plots))
	for k, p := range plots {
		for _, format := range []string{figure.PNG, figure.SVG} {
			data, err := figure.Render(p.Figure, format)
			if err != nil {
				return nil, err
			}
			name := PlotFile(p.Name, format)
			if err := f.WriteFile(name, data); err != nil {
				return nil, err
			}
			files = append(files, name)
			if format == figure.SVG {
				svgs[k] = data
			}
		}
	}
	if err := writeHTML(f, r, s, plots, svgs); err != nil {
		return nil, err
	}
	return append(files, ReportFile), nil
}
