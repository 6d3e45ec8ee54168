package result

import (
	"encoding/csv"
	"io"
	"math"
	"strconv"

	"github.com/desmear/desmear/binning"
)

func init() {
	Register(Writer{Name: "regions", Default: true, NeedsTruthBinning: true, Write: writeRegions})
}

// RegionFile returns the name of the table of the truth region named
// region: region-NAME.csv.
func RegionFile(region string) string { return "region-" + region + ".csv" }

// writeRegions writes one table per region of the truth binning s.
func writeRegions(f *Folder, r *Result, s *binning.Scheme) ([]string, error) {
	if err := r.checkBins(s); err != nil {
		return nil, err
	}
	dens, densUnc := r.densities(s)
	parts := r.Breakdown()
	var files []string
	for k, reg := range s.Regions() {
		name := RegionFile(reg.Name())
		if err := writeFile(f, name, func(w io.Writer) error { return writeRegion(w, s, k, r, dens, densUnc, parts) }); err != nil {
			return nil, err
		}
		files = append(files, name)
	}
	return files, nil
}

// writeRegion writes the in-range bins of region k: global index, the
// edges of each axis of the region, the volume, the estimate and its
// total uncertainty, the parts of that uncertainty (the data's and the
// simulation's statistics, the systematic variations; see Breakdown),
// the estimate and its total uncertainty as a density, the efficiency,
// purity and stability (empty where not defined or not known).
func writeRegion(w io.Writer, s *binning.Scheme, k int, r *Result, dens, densUnc []float64, parts Breakdown) error {
	cw := csv.NewWriter(w)
	reg := s.Regions()[k]
	header := []string{"index"}
	for _, ax := range reg.Axes() {
		header = append(header, ax.Name()+"_low", ax.Name()+"_high")
	}
	header = append(header, "volume", "estimate", "uncertainty", "uncertainty_data", "uncertainty_simulation", "uncertainty_systematic", "density", "density_uncertainty", "efficiency", "purity", "stability", "determined")
	if err := cw.Write(header); err != nil {
		return err
	}
	f := func(v float64) string {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return ""
		}
		return strconv.FormatFloat(v, 'g', -1, 64)
	}
	ptr := func(v []*float64, g int) float64 {
		if v == nil || v[g] == nil {
			return math.NaN()
		}
		return *v[g]
	}
	lo, hi := s.Span(k)
	for g := lo; g < hi; g++ {
		b := s.Bin(g)
		rec := []string{strconv.Itoa(g)}
		for i := range b.Axes {
			rec = append(rec, f(b.Low[i]), f(b.High[i]))
		}
		rec = append(rec, f(b.Volume), f(r.Estimate[g]), f(at(r.Uncertainty, g)),
			f(parts.Data[g]), f(parts.Simulation[g]), f(parts.Systematic[g]), f(dens[g]), f(at(densUnc, g)),
			f(r.Efficiency[g]), f(ptr(r.Purity, g)), f(ptr(r.Stability, g)), strconv.FormatBool(r.Determined[g]))
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}
