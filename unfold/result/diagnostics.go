package result

import (
	"encoding/csv"
	"io"
	"math"
	"slices"
	"strconv"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold"
)

// The files of the diagnostics format.
const (
	RecoBinsFile    = "reco-bins.csv"
	TruthBinsFile   = "truth-bins.csv"
	CorrelationFile = "correlation.csv"
	HistoryFile     = "history.csv"
	ResponseFile    = "response.csv"
)

// DiagnosticsFiles lists the files the diagnostics format may write.
func DiagnosticsFiles() []string {
	return []string{RecoBinsFile, TruthBinsFile, CorrelationFile, HistoryFile, ResponseFile}
}

// MaxResponseCells is the largest number of stored migration cells the
// diagnostics write to response.csv; larger responses are left out (the
// response bundle of desmear response holds them all).
const MaxResponseCells = 1 << 20

// Thresholds of Checks: truth bins with an efficiency or a purity below
// them are counted as poorly measured (common practice: a purity of at
// least one half keeps the migrations out of a bin below the events that
// stay in it).
const (
	LowEfficiency = 0.1
	LowPurity     = 0.5
)

func init() {
	Register(Writer{Name: "diagnostics", Default: true, Write: writeDiagnostics})
}

// SetProblem records in r what the result alone does not hold but the
// diagnostics need from the problem p it was unfolded from: the generated
// counts, the prior when given, the data and its variance (n for
// Poisson data), the background and its variance, and the migrations
// (kept out of result.json). It computes FoldedChi2 and FoldedBins. The
// slices are copied.
func (r *Result) SetProblem(p *unfold.Problem) {
	r.Generated = slices.Clone(p.Generated)
	r.Prior = slices.Clone(p.Prior)
	r.Data = slices.Clone(p.Data)
	r.DataVariance = slices.Clone(p.DataVariance)
	if r.DataVariance == nil {
		r.DataVariance = slices.Clone(p.Data)
	}
	r.Background = slices.Clone(p.Background)
	r.BackgroundVariance = slices.Clone(p.BackgroundVariance)
	r.Migrations = p.Migrations
	r.FoldedChi2, r.FoldedBins = 0, 0
	for _, z := range r.Pulls() {
		r.FoldedChi2 += z * z
	}
	for i := range r.Data {
		if r.PullVariance(i) > 0 {
			r.FoldedBins++
		}
	}
	if r.Scan != nil && p.Migrations != nil {
		r.Scan.foldedChi2(r, p)
	}
	r.CollapsedBins = r.Collapsed()
}

// CollapseFall is the fall of an estimate from its start below which
// Collapsed looks at its uncertainty (method.md §24).
const CollapseFall = 1e-2

// Collapsed returns the determined truth bins whose linearised
// uncertainty collapsed with the estimate (method.md §24): an iterative
// result whose estimate μ_j fell to at most CollapseFall times its start
// μ_j(0) (the prior, or the generated spectrum, scaled so that
// Σ_j eps_j μ_j(0) = Σ_i (n_i − b_i)) while its uncertainty is at most
// sqrt(μ_j), the Poisson uncertainty of the estimate itself (a relative
// uncertainty below 1/sqrt(μ_j)). nil without an uncertainty, without
// data or for a method that does not iterate.
func (r *Result) Collapsed() []int {
	if r.Uncertainty == nil || r.Data == nil || len(r.History) == 0 {
		return nil
	}
	start := r.Prior
	if start == nil {
		start = r.Generated
	}
	if len(start) != len(r.Estimate) {
		return nil
	}
	var sumN, sumEps float64
	for i, n := range r.Data {
		sumN += n
		if r.Background != nil {
			sumN -= r.Background[i]
		}
	}
	for j, p := range start {
		if r.Determined[j] {
			sumEps += r.Efficiency[j] * p
		}
	}
	if !(sumN > 0) || !(sumEps > 0) {
		return nil
	}
	var out []int
	for j, p := range start {
		mu0 := p * sumN / sumEps
		if r.Determined[j] && mu0 > 0 && r.Estimate[j] <= CollapseFall*mu0 && r.Uncertainty[j] <= math.Sqrt(r.Estimate[j]) {
			out = append(out, j)
		}
	}
	return out
}

// PullVariance returns var n_i + var b_i of reco bin i, the variance of
// the difference between the data and the folded expectation as far as
// the inputs give it (method.md §16 Folded comparison).
func (r *Result) PullVariance(i int) float64 {
	v := r.DataVariance[i]
	if r.BackgroundVariance != nil {
		v += r.BackgroundVariance[i]
	}
	return v
}

// Pulls returns (n_i − ν_i) / sqrt(var n_i + var b_i) per reco bin, 0
// where that variance is 0; nil when r holds no data (method.md §16
// Folded comparison).
func (r *Result) Pulls() []float64 {
	if r.Data == nil {
		return nil
	}
	z := make([]float64, len(r.Data))
	for i, n := range r.Data {
		if v := r.PullVariance(i); v > 0 {
			z[i] = (n - r.Folded[i]) / math.Sqrt(v)
		}
	}
	return z
}

// Correlation returns the correlation matrix ρ_ij = C_ij / sqrt(C_ii C_jj)
// of the covariance of r, 0 where a variance is 0; nil without a full
// covariance.
func (r *Result) Correlation() [][]float64 {
	if r.Covariance == nil {
		return nil
	}
	n := len(r.Covariance)
	sd := make([]float64, n)
	for i := range sd {
		sd[i] = math.Sqrt(r.Covariance[i][i])
	}
	rho := make([][]float64, n)
	for i := range rho {
		rho[i] = make([]float64, n)
		for j := range rho[i] {
			switch {
			case i == j && sd[i] > 0:
				rho[i][j] = 1
			case sd[i] > 0 && sd[j] > 0:
				rho[i][j] = r.Covariance[i][j] / (sd[i] * sd[j])
			}
		}
	}
	return rho
}

// Checks are the counts the terminal summary reports after a run.
type Checks struct {
	// HasData reports that FoldedChi2 and FoldedBins are known.
	HasData    bool
	FoldedChi2 float64
	FoldedBins int
	// Undetermined counts the truth bins the response cannot measure.
	Undetermined int
	// LowEfficiency and LowPurity count the determined in-range truth
	// bins (all truth bins without a binning) whose efficiency is below
	// LowEfficiency, or whose purity is below LowPurity.
	LowEfficiency, LowPurity int
	// Clipped counts the reco bins where data minus background was set
	// to 0.
	Clipped int
}

// Check returns the checks of r.
func (r *Result) Check() Checks {
	c := Checks{HasData: r.Data != nil, FoldedChi2: r.FoldedChi2, FoldedBins: r.FoldedBins, Clipped: len(r.ClippedRecoBins)}
	for j, d := range r.Determined {
		if !d {
			c.Undetermined++
			continue
		}
		if r.TruthBinning != nil && r.TruthBinning.Flow[j] {
			continue
		}
		if r.Efficiency[j] < LowEfficiency {
			c.LowEfficiency++
		}
		if r.Purity != nil && r.Purity[j] != nil && *r.Purity[j] < LowPurity {
			c.LowPurity++
		}
	}
	return c
}

// writeDiagnostics writes the diagnostic tables of r: the reco bins
// (with data), the truth bins, the correlation (with a full
// covariance), the iteration history (when there is one) and the
// response (when known and at most MaxResponseCells cells).
func writeDiagnostics(f *Folder, r *Result, _ *binning.Scheme) ([]string, error) {
	var files []string
	table := func(name string, header []string, rows int, row func(i int, rec []string) []string) error {
		err := writeFile(f, name, func(w io.Writer) error { return writeTable(w, header, rows, row) })
		if err == nil {
			files = append(files, name)
		}
		return err
	}
	label := func(b *Binning, i int) string { return b.Labels[i] }
	if r.Data != nil {
		header := []string{"index"}
		if r.RecoBinning != nil {
			header = append(header, "label")
		}
		header = append(header, "data", "data_variance")
		if r.Background != nil {
			header = append(header, "background", "background_variance")
		}
		header = append(header, "folded", "pull")
		pulls := r.Pulls()
		if err := table(RecoBinsFile, header, len(r.Data), func(i int, rec []string) []string {
			rec = append(rec, strconv.Itoa(i))
			if r.RecoBinning != nil {
				rec = append(rec, label(r.RecoBinning, i))
			}
			rec = append(rec, formatFloat(r.Data[i]), formatFloat(r.DataVariance[i]))
			if r.Background != nil {
				bv := 0.0
				if r.BackgroundVariance != nil {
					bv = r.BackgroundVariance[i]
				}
				rec = append(rec, formatFloat(r.Background[i]), formatFloat(bv))
			}
			return append(rec, formatFloat(r.Folded[i]), formatFloat(pulls[i]))
		}); err != nil {
			return nil, err
		}
	}
	header := []string{"index"}
	if r.TruthBinning != nil {
		header = append(header, "label", "flow")
	}
	header = append(header, "determined")
	if r.Generated != nil {
		header = append(header, "generated")
	}
	header = append(header, "efficiency")
	if r.Purity != nil {
		header = append(header, "purity", "stability")
	}
	opt := func(v []*float64, j int) string {
		if v == nil || v[j] == nil {
			return ""
		}
		return formatFloat(*v[j])
	}
	if err := table(TruthBinsFile, header, len(r.Estimate), func(j int, rec []string) []string {
		rec = append(rec, strconv.Itoa(j))
		if r.TruthBinning != nil {
			rec = append(rec, label(r.TruthBinning, j), strconv.FormatBool(r.TruthBinning.Flow[j]))
		}
		rec = append(rec, strconv.FormatBool(r.Determined[j]))
		if r.Generated != nil {
			rec = append(rec, formatFloat(r.Generated[j]))
		}
		rec = append(rec, formatFloat(r.Efficiency[j]))
		if r.Purity != nil {
			rec = append(rec, opt(r.Purity, j), opt(r.Stability, j))
		}
		return rec
	}); err != nil {
		return nil, err
	}
	if rho := r.Correlation(); rho != nil {
		header := []string{"index"}
		for j := range rho {
			header = append(header, strconv.Itoa(j))
		}
		if err := table(CorrelationFile, header, len(rho), func(i int, rec []string) []string {
			rec = append(rec, strconv.Itoa(i))
			for _, v := range rho[i] {
				rec = append(rec, formatFloat(v))
			}
			return rec
		}); err != nil {
			return nil, err
		}
	}
	if len(r.History) > 0 {
		if err := table(HistoryFile, []string{"iteration", "chi2", "change", "log_likelihood"}, len(r.History), func(k int, rec []string) []string {
			s := r.History[k]
			return append(rec, strconv.Itoa(s.Iteration), formatFloat(s.Chi2), formatFloat(s.Change), formatFloat(s.LogLikelihood))
		}); err != nil {
			return nil, err
		}
	}
	if m := r.Migrations; m != nil && m.NNZ() <= MaxResponseCells && r.Generated != nil {
		ptr, row, val := m.ColPtr(), m.RowIdx(), m.Values()
		_, nt := m.Dims()
		cells := make([][2]int, 0, m.NNZ()) // (truth, position) in column order
		for j := 0; j < nt; j++ {
			for p := ptr[j]; p < ptr[j+1]; p++ {
				cells = append(cells, [2]int{j, p})
			}
		}
		if err := table(ResponseFile, []string{"reco", "truth", "migrations", "probability"}, len(cells), func(k int, rec []string) []string {
			j, p := cells[k][0], cells[k][1]
			prob := 0.0
			if r.Generated[j] > 0 {
				prob = val[p] / r.Generated[j]
			}
			return append(rec, strconv.Itoa(row[p]), strconv.Itoa(j), formatFloat(val[p]), formatFloat(prob))
		}); err != nil {
			return nil, err
		}
	}
	return files, nil
}

// writeTable writes a CSV table of the header and rows rows, each made
// by row from an empty record.
func writeTable(w io.Writer, header []string, rows int, row func(i int, rec []string) []string) error {
	cw := csv.NewWriter(w)
	if err := cw.Write(header); err != nil {
		return err
	}
	rec := make([]string, 0, len(header))
	for i := 0; i < rows; i++ {
		if err := cw.Write(row(i, rec[:0])); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}
