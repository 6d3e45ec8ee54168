package main

import (
	"fmt"
	"io"
	"path/filepath"
	"slices"
	"strings"

	"github.com/spf13/cobra"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold/result"
)

type reportOptions struct {
	truthBinning string
}

func newReportCommand(g *globalOptions) *cobra.Command {
	var o reportOptions
	cmd := &cobra.Command{
		Use:   "report RESULT_DIR",
		Short: "Write the plots and the report page of a result folder",
		Long: `report draws the plots of a result folder (PNG and SVG in its plots/
folder) and writes its report.html: the spectra per slice, the efficiency,
purity and stability, the data against the folded estimate with the pulls,
the iteration history, the response and the correlation matrices.
"desmear unfold" and "desmear demo" write the same report unless
--no-report is given; this command writes it again, or for a folder written
without it.

The spectra need the truth binning: it is read from the file recorded in
result.json (whose SHA-256 must still match), or from --truth-binning. The
folder is replaced atomically by a copy holding the new report; every other
file keeps its bytes.`,
		Example: `  desmear report demo-out/result
  desmear report result --truth-binning truth.yaml`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			return runReport(g, args[0], &o)
		},
	}
	cmd.Flags().StringVar(&o.truthBinning, "truth-binning", "", "truth binning scheme `T.yaml` of the result (default: the file recorded in result.json)")
	return cmd
}

func runReport(g *globalOptions, dir string, o *reportOptions) error {
	r, err := result.Read(dir)
	if err != nil {
		return inputErr(err)
	}
	truth, err := reportTruth(r, o.truthBinning)
	if err != nil {
		return err
	}
	files, err := result.ReplaceReport(dir, r, truth)
	if err != nil {
		return ioErr(fmt.Errorf("writing the report of %s: %w", dir, err))
	}
	fmt.Fprintf(g.stdout, "report: %s (%d plots)\n", filepath.Join(dir, result.ReportFile), countPlots(files))
	return nil
}

// reportTruth returns the truth binning of r: the file given, or the
// one its inputs record if it is unchanged; nil when r has none.
func reportTruth(r *result.Result, given string) (*binning.Scheme, error) {
	if r.TruthBinning == nil && given == "" {
		return nil, nil
	}
	path, want := given, ""
	if path == "" {
		for _, in := range r.Inputs {
			if in.Role == "truth-binning" {
				path, want = in.Path, in.SHA256
			}
		}
	}
	if path == "" {
		return nil, nil
	}
	var s *binning.Scheme
	in, err := readHashed("truth-binning", "truth binning", path, func(rd io.Reader) (err error) {
		s, err = binning.Decode(rd, path)
		return err
	})
	if err != nil {
		if given == "" {
			return nil, fmt.Errorf("%w (give the truth binning of the result with --truth-binning)", err)
		}
		return nil, err
	}
	if want != "" && in.SHA256 != want {
		return nil, inputErr(fmt.Errorf("the truth binning %s has changed since the result was written (SHA-256 %s, recorded %s); give the binning of the result with --truth-binning", path, in.SHA256, want))
	}
	if s.Len() != r.TruthBins || r.TruthBinning != nil && !slices.Equal(labels(s), r.TruthBinning.Labels) {
		return nil, inputErr(fmt.Errorf("the truth binning %s does not match the result (%d bins, the result %d, or other bin labels)", path, s.Len(), r.TruthBins))
	}
	return s, nil
}

func labels(s *binning.Scheme) []string {
	l := make([]string, s.Len())
	for g := range l {
		l[g] = s.Label(g)
	}
	return l
}

// countPlots counts the PNG files among files.
func countPlots(files []string) int {
	n := 0
	for _, f := range files {
		if strings.HasSuffix(f, ".png") {
			n++
		}
	}
	return n
}

// withoutReport returns formats without the report (--no-report).
func withoutReport(formats []string) []string {
	return slices.DeleteFunc(slices.Clone(formats), func(f string) bool { return f == result.ReportFormat })
}
