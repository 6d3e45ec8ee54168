package result

import (
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold"
)

// Files of the breakdown of the uncertainty by source.
const (
	SourcesFile = "sources.csv"
	ShiftsFile  = "shifts.csv"
)

// SourcesFormat is the name of the format of the breakdown by source:
// sources.csv, shifts.csv and covariance-NAME.csv per source.
const SourcesFormat = "sources"

func init() {
	Register(Writer{Name: SourcesFormat, Default: true, Write: writeSources})
}

// SourceCovarianceFile returns the name of the covariance table of the
// source named name: covariance-NAME.csv, with every character other
// than letters, digits, '.', '_' and '-' replaced by '_'.
func SourceCovarianceFile(name string) string {
	return "covariance-" + strings.Map(func(r rune) rune {
		if r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9' || r == '.' || r == '_' || r == '-' {
			return r
		}
		return '_'
	}, name) + ".csv"
}

// writeSources writes the breakdown when the result has more than one
// source (with the data's alone, the breakdown is the total):
// sources.csv, shifts.csv when a source has a shift, and the covariance
// of each source that has one.
func writeSources(f *Folder, r *Result, truth *binning.Scheme) ([]string, error) {
	if len(r.Sources) < 2 {
		return nil, nil
	}
	if truth != nil {
		if err := r.checkBins(truth); err != nil {
			return nil, err
		}
	}
	files := []string{SourcesFile}
	if err := writeFile(f, SourcesFile, func(w io.Writer) error { return WriteSources(w, r, truth) }); err != nil {
		return nil, err
	}
	for _, s := range r.Sources {
		if s.Shift != nil {
			if err := writeFile(f, ShiftsFile, func(w io.Writer) error { return WriteShifts(w, r, truth) }); err != nil {
				return nil, err
			}
			files = append(files, ShiftsFile)
			break
		}
	}
	seen := map[string]string{}
	for _, s := range r.Sources {
		if s.Covariance == nil {
			continue
		}
		name := SourceCovarianceFile(s.Name)
		if other, dup := seen[name]; dup {
			return nil, fmt.Errorf("result: the sources %q and %q share the covariance file %s: rename one", other, s.Name, name)
		}
		seen[name] = s.Name
		if err := writeFile(f, name, func(w io.Writer) error { return writeMatrix(w, s.Covariance) }); err != nil {
			return nil, err
		}
		files = append(files, name)
	}
	return files, nil
}

// binColumns returns the leading columns of a per-bin table: index and,
// with a truth binning, region and flow.
func binColumns(s *binning.Scheme, j int) []string {
	rec := []string{strconv.Itoa(j)}
	if s != nil {
		b := s.Bin(j)
		rec = append(rec, b.RegionName, strconv.FormatBool(b.Flow))
	}
	return rec
}

func binHeader(s *binning.Scheme) []string {
	if s == nil {
		return []string{"index"}
	}
	return []string{"index", "region", "flow"}
}

// WriteSources writes the uncertainty of every truth bin by source as
// CSV: index (with a truth binning s, nil for none: region and flow),
// one column per source named by the source, then total (the top-level
// uncertainty, the root of the summed variances; method.md §18).
func WriteSources(w io.Writer, r *Result, s *binning.Scheme) error {
	cw := csv.NewWriter(w)
	header := binHeader(s)
	for _, src := range r.Sources {
		header = append(header, src.Name)
	}
	if err := cw.Write(append(header, "total")); err != nil {
		return err
	}
	for j := range r.Estimate {
		rec := binColumns(s, j)
		for _, src := range r.Sources {
			rec = append(rec, formatFloat(src.Uncertainty[j]))
		}
		if err := cw.Write(append(rec, formatFloat(at(r.Uncertainty, j)))); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// WriteShifts writes the signed shift of every truth bin by systematic
// source as CSV: index (region and flow with a truth binning), then per
// source with a shift a column named by the source (the varied estimate
// minus the nominal one, or the half-difference of a pair), and for a
// pair NAME_up and NAME_down (the one-sided shifts).
func WriteShifts(w io.Writer, r *Result, s *binning.Scheme) error {
	cw := csv.NewWriter(w)
	header := binHeader(s)
	for _, src := range r.Sources {
		if src.Shift == nil {
			continue
		}
		header = append(header, src.Name)
		if src.ShiftUp != nil {
			header = append(header, src.Name+"_up", src.Name+"_down")
		}
	}
	if err := cw.Write(header); err != nil {
		return err
	}
	for j := range r.Estimate {
		rec := binColumns(s, j)
		for _, src := range r.Sources {
			if src.Shift == nil {
				continue
			}
			rec = append(rec, formatFloat(src.Shift[j]))
			if src.ShiftUp != nil {
				rec = append(rec, formatFloat(src.ShiftUp[j]), formatFloat(src.ShiftDown[j]))
			}
		}
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// writeMatrix writes rows as a CSV table: a header row of the column
// indices, then each row with its index first.
func writeMatrix(w io.Writer, rows [][]float64) error {
	cw := csv.NewWriter(w)
	header := []string{"index"}
	for j := range rows {
		header = append(header, strconv.Itoa(j))
	}
	if err := cw.Write(header); err != nil {
		return err
	}
	for i, row := range rows {
		rec := []string{strconv.Itoa(i)}
		for _, v := range row {
			rec = append(rec, formatFloat(v))
		}
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// Breakdown is the uncertainty of each truth bin in three parts: the
// data's statistics, the simulation's statistics and the systematic
// variations (the root of the summed variances of every other source).
// A part is NaN where the result has no such source (Systematic: where
// it has no source at all).
type Breakdown struct {
	Data, Simulation, Systematic []float64
}

// Breakdown returns the three parts of the uncertainty of r.
func (r *Result) Breakdown() Breakdown {
	nt := len(r.Estimate)
	b := Breakdown{Data: nanVector(nt), Simulation: nanVector(nt), Systematic: nanVector(nt)}
	if len(r.Sources) == 0 {
		return b
	}
	for j := range b.Systematic {
		b.Systematic[j] = 0
	}
	for _, s := range r.Sources {
		switch s.Name {
		case unfold.SourceData:
			copy(b.Data, s.Uncertainty)
		case unfold.SourceSimulation:
			copy(b.Simulation, s.Uncertainty)
		default:
			for j, u := range s.Uncertainty {
				b.Systematic[j] += u * u
			}
		}
	}
	for j, v := range b.Systematic {
		b.Systematic[j] = math.Sqrt(v)
	}
	return b
}

func nanVector(n int) []float64 {
	v := make([]float64, n)
	for j := range v {
		v[j] = math.NaN()
	}
	return v
}
