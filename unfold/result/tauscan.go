package result

import (
	"encoding/csv"
	"io"
	"strconv"

	"github.com/desmear/desmear/binning"
)

// TauScanFile is the name of the table of the scan of tau of the
// Tikhonov method.
const TauScanFile = "tau-scan.csv"

func init() {
	Register(Writer{Name: "tau-scan", Default: true, Write: func(f *Folder, r *Result, _ *binning.Scheme) ([]string, error) {
		if r.Tikhonov == nil || len(r.Tikhonov.Scan) == 0 {
			return nil, nil // no scan: a fixed tau, or another method
		}
		if err := writeFile(f, TauScanFile, func(w io.Writer) error { return WriteTauScan(w, r.Tikhonov) }); err != nil {
			return nil, err
		}
		return []string{TauScanFile}, nil
	}})
}

// WriteTauScan writes the scan of tau of t as CSV, one row per tau in
// increasing order: tau, residual_norm, penalty_norm, curvature (of the
// L-curve; 0 where not defined), average_global_correlation (empty
// unless the correlation criterion was used), converged, cg_iterations
// (0 for the dense solve), chosen (true on the row of the tau used)
// and correlation_error (the standard error of an average global
// correlation estimated from a sample of bins; empty when exact).
func WriteTauScan(w io.Writer, t *Tikhonov) error {
	cw := csv.NewWriter(w)
	if err := cw.Write([]string{"tau", "residual_norm", "penalty_norm", "curvature", "average_global_correlation", "converged", "cg_iterations", "chosen", "correlation_error"}); err != nil {
		return err
	}
	for _, p := range t.Scan {
		corr, corrErr := "", ""
		if t.Criterion == "correlation" {
			corr = formatFloat(p.Correlation)
		}
		if t.CorrelationSample > 0 {
			corrErr = formatFloat(p.CorrelationError)
		}
		rec := []string{formatFloat(p.Tau), formatFloat(p.ResidualNorm), formatFloat(p.PenaltyNorm), formatFloat(p.Curvature), corr,
			strconv.FormatBool(p.Converged), strconv.Itoa(p.CGIterations), strconv.FormatBool(p.Tau == t.Tau), corrErr}
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}
