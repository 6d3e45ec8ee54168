package validate

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"strconv"

	"github.com/desmear/desmear/unfold/internal/atomicfile"
	"github.com/desmear/desmear/unfold/result/figure"
)

// The files of a validation folder; JSONFile also marks a folder as an
// earlier validation folder that may be replaced.
const (
	JSONFile     = "validation.json"
	ScanFile     = "scan.csv"
	ScanBinsFile = "scan-bins.csv"
	ChecksFile   = "checks.csv"
)

// Files lists the files WriteFolder writes, in order: the document, the
// tables and the figure of the scan (ScanFigure) as PNG and SVG.
func Files() []string {
	return []string{JSONFile, ScanFile, ScanBinsFile, ChecksFile, ScanPlot + "." + figure.PNG, ScanPlot + "." + figure.SVG}
}

// CheckFolder reports early whether a validation folder could be
// written at dir (see atomicfile.Check: an existing folder only with
// replace, and only an empty one or an earlier validation folder).
func CheckFolder(dir string, replace bool) error {
	return atomicfile.Check(dir, JSONFile, replace)
}

// Program names the program that wrote a report.
type Program struct {
	Name    string `json:"name"`
	Version string `json:"version"`
}

// WriteFolder writes r as a validation folder at dir, atomically: the
// folder holds every file or is left as it was.
func WriteFolder(dir string, replace bool, prog Program, r *Report) error {
	f, err := atomicfile.New(dir, JSONFile, replace)
	if err != nil {
		return err
	}
	defer f.Abort()
	doc := struct {
		Program Program `json:"program"`
		*Report
	}{prog, r}
	js, err := json.MarshalIndent(doc, "", "  ")
	if err != nil {
		return err
	}
	if err := f.WriteFile(JSONFile, append(js, '\n')); err != nil {
		return err
	}
	for _, t := range []struct {
		name string
		rows [][]string
	}{
		{ScanFile, r.scanRows()},
		{ScanBinsFile, r.scanBinRows()},
		{ChecksFile, r.checkRows()},
	} {
		var b bytes.Buffer
		w := csv.NewWriter(&b)
		if err := w.WriteAll(t.rows); err != nil {
			return err
		}
		if err := f.WriteFile(t.name, b.Bytes()); err != nil {
			return err
		}
	}
	fig := r.ScanFigure()
	for _, format := range []string{figure.PNG, figure.SVG} {
		b, err := figure.Render(fig, format)
		if err != nil {
			return err
		}
		if err := f.WriteFile(ScanPlot+"."+format, b); err != nil {
			return err
		}
	}
	return f.Commit()
}

func num(x float64) string { return strconv.FormatFloat(x, 'g', -1, 64) }

func (r *Report) label(j int) string {
	if j < len(r.Labels) {
		return r.Labels[j]
	}
	return ""
}

// scanRows: one row per k with the summed figures and the criterion.
func (r *Report) scanRows() [][]string {
	rows := [][]string{{"k", "mse", "mse_error", "mse_weighted", "mse_weighted_error", "bias_over_sigma", "bias_over_sigma_error", "coverage_mean", "coverage_min", "coverage_expected_error", "criterion", "recommended"}}
	for i, p := range r.Scan {
		rec := "0"
		if p.K == r.Recommended {
			rec = "1"
		}
		rows = append(rows, []string{strconv.Itoa(p.K), num(p.MSE), num(p.MSEError), num(p.MSEWeighted), num(p.MSEWeightedError),
			num(p.BiasOverSigma), num(p.BiasOverSigmaError), num(p.CoverageMean), num(p.CoverageMin), num(p.CoverageExpectedError),
			num(r.Recommendation.Curve[i]), rec})
	}
	return rows
}

// scanBinRows: one row per k and determined truth bin.
func (r *Report) scanBinRows() [][]string {
	rows := [][]string{{"k", "bin", "label", "truth", "bias", "bias_error", "variance", "variance_rel_error", "sigma", "pull_mean", "pull_mean_error", "pull_width", "pull_width_error", "coverage", "coverage_error"}}
	for _, p := range r.Scan {
		for j, d := range r.Determined {
			if !d {
				continue
			}
			rows = append(rows, []string{strconv.Itoa(p.K), strconv.Itoa(j), r.label(j), num(r.Truth[j]), num(p.Bias[j]), num(p.BiasError[j]),
				num(p.Variance[j]), num(p.VarianceRelError), num(p.Sigma[j]), num(p.PullMean[j]), num(p.PullMeanError[j]),
				num(p.PullWidth[j]), num(p.PullWidthError[j]), num(p.Coverage[j]), num(p.CoverageError[j])})
		}
	}
	return rows
}

// checkRows: one row per closure or stress test and determined truth
// bin.
func (r *Report) checkRows() [][]string {
	rows := [][]string{{"test", "bin", "label", "truth", "estimate", "uncertainty", "bias", "pull", "nominal", "nominal_uncertainty", "nominal_difference", "nominal_pull"}}
	for _, c := range append(append([]*Check(nil), r.Closure...), r.Stress...) {
		for j, d := range r.Determined {
			if !d {
				continue
			}
			nv, nu, nd, np := "", "", "", ""
			if c.Nominal != nil && r.Nominal != nil {
				nv, nu = num(r.Nominal.Estimate[j]), num(r.Nominal.Uncertainty[j])
				nd, np = num(c.Nominal.Difference[j]), num(c.Nominal.Pull[j])
			}
			rows = append(rows, []string{c.Name, strconv.Itoa(j), r.label(j), num(c.Truth[j]), num(c.Estimate[j]), num(c.Uncertainty[j]),
				num(c.Bias[j]), num(c.Pull[j]), nv, nu, nd, np})
		}
	}
	return rows
}
