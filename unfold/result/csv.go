package result

import (
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"strconv"

	"github.com/desmear/desmear/binning"
)

// CSVFile is the name of the per-bin table of a result folder.
const CSVFile = "result.csv"

func init() {
	Register(Writer{Name: "csv", Default: true, Write: func(f *Folder, r *Result, truth *binning.Scheme) ([]string, error) {
		if err := writeFile(f, CSVFile, func(w io.Writer) error { return WriteCSV(w, r, truth) }); err != nil {
			return nil, err
		}
		if r.Comparison == nil {
			return []string{CSVFile}, nil
		}
		if err := writeFile(f, ComparisonFile, func(w io.Writer) error { return WriteComparison(w, r, truth) }); err != nil {
			return nil, err
		}
		return []string{CSVFile, ComparisonFile}, nil
	}})
}

// WriteCSV writes the per-bin table of r as CSV: the columns index; with
// a truth binning s (nil for none) region, flow and, for every axis of
// the scheme, NAME_low and NAME_high (empty for bins whose region lacks
// the axis; "-inf" and "inf" on the open side of flow bins); then
// estimate, uncertainty (only when r has one), determined and efficiency.
func WriteCSV(w io.Writer, r *Result, s *binning.Scheme) error {
	nt := len(r.Estimate)
	if s != nil && s.Len() != nt {
		return fmt.Errorf("result: truth binning has %d bins, the result %d", s.Len(), nt)
	}
	cw := csv.NewWriter(w)
	header := []string{"index"}
	var axes []string
	if s != nil {
		axes = s.AxisNames()
		header = append(header, "region", "flow")
		for _, a := range axes {
			header = append(header, a+"_low", a+"_high")
		}
	}
	header = append(header, "estimate")
	if r.Uncertainty != nil {
		header = append(header, "uncertainty")
	}
	header = append(header, "determined", "efficiency")
	if err := cw.Write(header); err != nil {
		return err
	}
	rec := make([]string, len(header))
	for j := 0; j < nt; j++ {
		rec = rec[:0]
		rec = append(rec, strconv.Itoa(j))
		if s != nil {
			bin := s.Bin(j)
			rec = append(rec, bin.RegionName, strconv.FormatBool(bin.Flow))
			for _, a := range axes {
				lo, hi := "", ""
				for k, name := range bin.Axes {
					if name == a {
						lo, hi = formatEdge(bin.Low[k]), formatEdge(bin.High[k])
					}
				}
				rec = append(rec, lo, hi)
			}
		}
		rec = append(rec, formatFloat(r.Estimate[j]))
		if r.Uncertainty != nil {
			rec = append(rec, formatFloat(r.Uncertainty[j]))
		}
		rec = append(rec, strconv.FormatBool(r.Determined[j]), formatFloat(r.Efficiency[j]))
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

func formatFloat(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

func formatEdge(v float64) string {
	switch {
	case math.IsInf(v, -1):
		return "-inf"
	case math.IsInf(v, 1):
		return "inf"
	}
	return formatFloat(v)
}
