package result

import (
	"bytes"
	"fmt"
	"math"
	"strconv"

	"go.yaml.in/yaml/v3"

	"github.com/desmear/desmear/binning"
)

// The data-record tables: the submission format of the field's public
// data repository (HEPData). The key names below are the format's.
const (
	// RecordFolder is the sub-folder of the result folder holding them.
	RecordFolder = "record"
	// SubmissionFile lists the tables.
	SubmissionFile = RecordFolder + "/submission.yaml"
)

// The uncertainty label of the data-statistical uncertainty, the
// format's usual one.
const recordStatLabel = "stat"

func init() {
	Register(Writer{Name: "record", Default: true, NeedsTruthBinning: true, Write: writeRecord})
}

// recordSubmission is one table's entry in submission.yaml.
type recordSubmission struct {
	Name        string          `yaml:"name"`
	Description string          `yaml:"description"`
	Keywords    []recordKeyword `yaml:"keywords"`
	DataFile    string          `yaml:"data_file"`
}

type recordKeyword struct {
	Name   string   `yaml:"name"`
	Values []string `yaml:"values"`
}

// recordTable is a data file: the independent and dependent variables.
type recordTable struct {
	IndependentVariables []recordVariable `yaml:"independent_variables"`
	DependentVariables   []recordVariable `yaml:"dependent_variables"`
}

type recordVariable struct {
	Header     recordHeader      `yaml:"header"`
	Qualifiers []recordQualifier `yaml:"qualifiers,omitempty"`
	Values     []recordValue     `yaml:"values"`
}

type recordHeader struct {
	Name  string `yaml:"name"`
	Units string `yaml:"units,omitempty"`
}

type recordQualifier struct {
	Name  string `yaml:"name"`
	Value string `yaml:"value"`
	Units string `yaml:"units,omitempty"`
}

// recordValue is a bin (Low, High), a number or a text (Value), with
// labelled uncertainties.
type recordValue struct {
	Value  any           `yaml:"value,omitempty"`
	Low    *float64      `yaml:"low,omitempty"`
	High   *float64      `yaml:"high,omitempty"`
	Errors []recordError `yaml:"errors,omitempty"`
}

type recordError struct {
	Symerror float64 `yaml:"symerror"`
	Label    string  `yaml:"label"`
}

// RecordTableFile returns the data file of the slice sl of s (relative to
// the record folder): REGION.yaml, REGION_y0.yaml, ...
func RecordTableFile(s *binning.Scheme, sl *Slice) string {
	return s.Regions()[sl.Region].Name() + sl.Suffix(s) + ".yaml"
}

// RecordCovarianceFile returns the covariance data file of the region
// named region.
func RecordCovarianceFile(region string) string { return "covariance_" + region + ".yaml" }

// writeRecord writes the record folder: one table per slice of the truth
// scheme s (in-range bins only; the estimate as counts and as a density
// per unit bin volume, with its data-statistical uncertainty), with a
// full covariance one covariance table of the densities per region, and
// the submission file listing them.
func writeRecord(f *Folder, r *Result, s *binning.Scheme) ([]string, error) {
	if err := r.checkBins(s); err != nil {
		return nil, err
	}
	dens, densUnc := r.densities(s)
	var subs []recordSubmission
	var files []string
	put := func(name string, v any) error {
		data, err := marshalYAML(v)
		if err != nil {
			return err
		}
		if err := f.WriteFile(RecordFolder+"/"+name, data); err != nil {
			return err
		}
		files = append(files, RecordFolder+"/"+name)
		return nil
	}
	for _, sl := range Slices(s) {
		reg := s.Regions()[sl.Region]
		densName, densUnits := densityLabel(r, reg)
		axes := reg.Axes()
		last := axes[len(axes)-1]
		ind := recordVariable{Header: recordHeader{Name: last.Name(), Units: last.Unit()}}
		for i := 0; i+1 < len(sl.Edges); i++ {
			lo, hi := roundSig(sl.Edges[i], 12), roundSig(sl.Edges[i+1], 12)
			ind.Values = append(ind.Values, recordValue{Low: &lo, High: &hi})
		}
		quals := []recordQualifier{{Name: "region", Value: reg.Name()}}
		for _, rg := range sl.Ranges(s) {
			quals = append(quals, recordQualifier{Name: rg.Axis, Value: rg.String(), Units: rg.Unit})
		}
		counts := recordVariable{Header: recordHeader{Name: "events"}, Qualifiers: quals}
		density := recordVariable{Header: recordHeader{Name: densName, Units: densUnits}, Qualifiers: quals}
		for _, g := range sl.Bins() {
			counts.Values = append(counts.Values, recordMeasured(r.Estimate[g], at(r.Uncertainty, g)))
			density.Values = append(density.Values, recordMeasured(dens[g], at(densUnc, g)))
		}
		file := RecordTableFile(s, &sl)
		if err := put(file, recordTable{IndependentVariables: []recordVariable{ind}, DependentVariables: []recordVariable{counts, density}}); err != nil {
			return nil, err
		}
		name := sl.Name(s)
		subs = append(subs, recordSubmission{
			Name:        name,
			Description: fmt.Sprintf("Unfolded spectrum in %s, per bin of %s: the expected number of events and the %s, with the data-statistical uncertainty.", name, last.Name(), densName),
			Keywords:    []recordKeyword{{Name: "observables", Values: []string{last.Name()}}, {Name: "phrases", Values: []string{"Unfolded", reg.Name()}}},
			DataFile:    file,
		})
	}
	if r.Covariance != nil {
		vol := densityScale(r, s)
		for k, reg := range s.Regions() {
			densName, densUnits := densityLabel(r, reg)
			lo, hi := s.Span(k)
			x := recordVariable{Header: recordHeader{Name: "bin"}}
			y := recordVariable{Header: recordHeader{Name: "bin"}}
			c := recordVariable{Header: recordHeader{Name: "covariance of the " + densName, Units: squareUnits(densUnits)}}
			for i := lo; i < hi; i++ {
				for j := lo; j < hi; j++ {
					x.Values = append(x.Values, recordValue{Value: s.Label(i)})
					y.Values = append(y.Values, recordValue{Value: s.Label(j)})
					c.Values = append(c.Values, recordValue{Value: roundSig(r.Covariance[i][j]*vol[i]*vol[j], 4)})
				}
			}
			file := RecordCovarianceFile(reg.Name())
			if err := put(file, recordTable{IndependentVariables: []recordVariable{x, y}, DependentVariables: []recordVariable{c}}); err != nil {
				return nil, err
			}
			subs = append(subs, recordSubmission{
				Name:        "covariance, " + reg.Name(),
				Description: fmt.Sprintf("Data-statistical covariance of the %s between the in-range bins of region %s.", densName, reg.Name()),
				Keywords:    []recordKeyword{{Name: "observables", Values: []string{"covariance"}}, {Name: "phrases", Values: []string{"Unfolded", "Covariance", reg.Name()}}},
				DataFile:    file,
			})
		}
	}
	var buf bytes.Buffer
	comment := fmt.Sprintf("Unfolded with %s %s, method %s.", r.Program.Name, r.Program.Version, r.Settings.Method)
	if r.Analysis != nil && r.Analysis.Title != "" {
		comment = r.Analysis.Title + ". " + comment
	}
	head, err := marshalYAML(map[string]string{"comment": comment})
	if err != nil {
		return nil, err
	}
	buf.Write(head)
	for _, sub := range subs {
		data, err := marshalYAML(sub)
		if err != nil {
			return nil, err
		}
		buf.WriteString("---\n")
		buf.Write(data)
	}
	if err := f.WriteFile(SubmissionFile, buf.Bytes()); err != nil {
		return nil, err
	}
	return append([]string{SubmissionFile}, files...), nil
}

// at returns v[g], or NaN when v is nil.
func at(v []float64, g int) float64 {
	if v == nil {
		return math.NaN()
	}
	return v[g]
}

// recordMeasured returns a value with its uncertainty u (NaN for none),
// rounded: u to two significant digits, the value to the same decimal
// place (common practice).
func recordMeasured(v, u float64) recordValue {
	if math.IsNaN(u) || u <= 0 {
		return recordValue{Value: roundSig(v, 6)}
	}
	exp := int(math.Floor(math.Log10(u))) - 1 // the decimal place of u's second digit
	digits := 1
	if v != 0 {
		digits = max(int(math.Floor(math.Log10(math.Abs(v))))-exp+1, 1)
	}
	return recordValue{Value: roundSig(v, digits), Errors: []recordError{{Symerror: roundSig(u, 2), Label: recordStatLabel}}}
}

// roundSig rounds v to n significant digits, as the nearest double to
// the decimal number, so that it prints without binary noise.
func roundSig(v float64, n int) float64 {
	if v == 0 || math.IsNaN(v) || math.IsInf(v, 0) {
		return v
	}
	x, _ := strconv.ParseFloat(strconv.FormatFloat(v, 'g', n, 64), 64)
	return x
}

func squareUnits(u string) string {
	if u == "" {
		return ""
	}
	return "(" + u + ")^2"
}

// densityScale returns per truth bin the factor from counts to the
// density of r: its density over its estimate, or 1/(volume
// luminosity) where the estimate is 0.
func densityScale(r *Result, s *binning.Scheme) []float64 {
	one := make([]float64, s.Len())
	for g := range one {
		one[g] = 1
	}
	f, _ := Densities(s, one, nil, r.Luminosity)
	return f
}

// marshalYAML encodes v as YAML indented by two spaces.
func marshalYAML(v any) ([]byte, error) {
	var buf bytes.Buffer
	enc := yaml.NewEncoder(&buf)
	enc.SetIndent(2)
	if err := enc.Encode(v); err != nil {
		return nil, err
	}
	if err := enc.Close(); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}
