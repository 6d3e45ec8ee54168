package result

import (
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"gonum.org/v1/gonum/mat"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/derive"
)

// DerivedFormat is the name of the format of the derived quantities'
// tables.
const DerivedFormat = "derived"

func init() {
	Register(Writer{Name: DerivedFormat, Default: true, NeedsTruthBinning: true, Write: writeDerived})
}

// DerivedFile and DerivedCovarianceFile return the names of the table of
// the derived quantity name and of its covariance.
func DerivedFile(name string) string           { return "derived-" + name + ".csv" }
func DerivedCovarianceFile(name string) string { return "derived-" + name + "-covariance.csv" }

// Derived is a quantity derived from the estimate (package derive): a
// projection, a density or a normalised shape of a truth region, with
// its uncertainty and covariance propagated through the Jacobian.
type Derived struct {
	Name           string   `json:"name"`
	Region         string   `json:"region"`
	Kind           string   `json:"kind"`
	Axes           []string `json:"axes"`
	PerSlice       []string `json:"per_slice,omitempty"`
	DivideByWidths []string `json:"divide_by_widths,omitempty"`
	Luminosity     bool     `json:"luminosity,omitempty"`
	// File is its table; CovarianceFile its covariance (absent without
	// the full covariance of the estimate).
	File           string `json:"file"`
	CovarianceFile string `json:"covariance_file,omitempty"`
	// Value per bin of the quantity (the bins of its table, in order);
	// Uncertainty the square root of the propagated variance, absent
	// when the estimate has no full covariance.
	Value       []float64 `json:"value"`
	Uncertainty []float64 `json:"uncertainty,omitempty"`
	// SingularCovariance marks a covariance singular by construction
	// (a normalised shape: every group sums to one).
	SingularCovariance bool `json:"singular_covariance,omitempty"`
	// Note says what the uncertainty is, or why there is none.
	Note string `json:"note"`

	// Covariance is the propagated covariance (written as
	// CovarianceFile); Binning the quantity's binning, one region of the
	// kept axes; Group the normalisation group of each bin of a shape.
	Covariance [][]float64     `json:"-"`
	Binning    *binning.Scheme `json:"-"`
	Group      []int           `json:"-"`
}

// NewDerived computes the quantity q of the estimate est, and its
// covariance D cov Dᵀ when cov (the full covariance of est) is not nil.
func NewDerived(q *derive.Quantity, est []float64, cov mat.Symmetric) Derived {
	sp := q.Spec()
	d := Derived{Name: sp.Name, Region: sp.Region, Kind: sp.Kind.String(), Axes: sp.Axes, PerSlice: sp.PerSlice,
		DivideByWidths: sp.DivideByWidths, Luminosity: sp.Luminosity, File: DerivedFile(sp.Name),
		Value: q.Value(make([]float64, q.Len()), est), Binning: q.Target()}
	if q.Groups() > 0 {
		d.Group = make([]int, q.Len())
		for t := range d.Group {
			d.Group[t] = q.Group(t)
		}
	}
	if cov == nil {
		d.Note = "no uncertainty: propagating it needs the full covariance of the estimate, which was not computed"
		return d
	}
	d.setCovariance(q, q.Covariance(nil, est, cov))
	d.Note = "exact linear propagation D Cov Dᵀ of the full covariance of the estimate"
	if q.Singular() {
		d.Note = "first-order propagation D Cov Dᵀ of the full covariance of the estimate; singular by construction (each normalisation group sums to one): do not invert it"
	}
	return d
}

// NewDerivedFromSources computes the quantity q of the estimate of res,
// number i of the problem's derived quantities (unfold.Problem.Derived),
// with the covariance summed over the sources' own propagations
// (unfold.Result.DerivedCovariance) when the estimate has no full
// covariance; without the sources' contributions it is NewDerived with
// no covariance, its note naming the source that lacks one.
func NewDerivedFromSources(q *derive.Quantity, res *unfold.Result, i int) Derived {
	if res.Covariance != nil {
		return NewDerived(q, res.Estimate, res.Covariance)
	}
	c := res.DerivedCovariance(i)
	d := NewDerived(q, res.Estimate, nil)
	if c == nil {
		for _, s := range res.Sources {
			if i >= len(s.Derived) || s.Derived[i] == nil {
				d.Note = fmt.Sprintf("no uncertainty: the source %q (%s) gives neither the full covariance of the estimate nor its own propagation to derived quantities", s.Name, s.Method)
				break
			}
		}
		return d
	}
	d.setCovariance(q, c)
	var how []string
	for _, s := range res.Sources {
		w := s.Name + ": exact"
		if s.Samples > 0 {
			w = fmt.Sprintf("%s: from the same %d probes or samples as its per-bin variances, relative precision about %.2g on the variances", s.Name, s.Samples, s.Precision)
		}
		how = append(how, w)
	}
	d.Note = "propagation D Cov Dᵀ source by source, without the full covariance of the estimate (" + strings.Join(how, "; ") + ")"
	if q.Singular() {
		d.Note += "; first order, singular by construction (each normalisation group sums to one): do not invert it"
	}
	return d
}

// setCovariance sets the covariance c of the quantity q, its
// uncertainties and its covariance file.
func (d *Derived) setCovariance(q *derive.Quantity, c *mat.SymDense) {
	sp := q.Spec()
	m := q.Len()
	d.Uncertainty = make([]float64, m)
	d.Covariance = make([][]float64, m)
	for t := range m {
		d.Uncertainty[t] = sqrtPos(c.At(t, t))
		d.Covariance[t] = make([]float64, m)
		for u := range m {
			d.Covariance[t][u] = c.At(t, u)
		}
	}
	d.CovarianceFile = DerivedCovarianceFile(sp.Name)
	d.SingularCovariance = q.Singular()
}

func sqrtPos(v float64) float64 {
	if v <= 0 {
		return 0
	}
	return math.Sqrt(v)
}

// table writes the CSV file name of f: the header, then rows records.
func table(f *Folder, name string, header []string, rows int, row func(i int, rec []string) []string) error {
	return writeFile(f, name, func(w io.Writer) error { return writeTable(w, header, rows, row) })
}

// writeDerived writes derived-NAME.csv for each derived quantity of r
// (and its covariance when there is one).
func writeDerived(f *Folder, r *Result, _ *binning.Scheme) ([]string, error) {
	var files []string
	for i := range r.Derived {
		d := &r.Derived[i]
		if d.Binning == nil || d.Binning.Len() != len(d.Value) {
			return nil, fmt.Errorf("result: derived quantity %q without its binning", d.Name)
		}
		reg := d.Binning.Regions()[0]
		header := []string{"index"}
		for _, a := range reg.Axes() {
			header = append(header, a.Name()+"_low", a.Name()+"_high")
		}
		header = append(header, "value")
		if d.Uncertainty != nil {
			header = append(header, "uncertainty")
		}
		if d.Group != nil {
			header = append(header, "group")
		}
		if err := table(f, d.File, header, len(d.Value), func(t int, rec []string) []string {
			b := d.Binning.Bin(t)
			rec = append(rec, strconv.Itoa(t))
			for k := range b.Axes {
				rec = append(rec, formatFloat(b.Low[k]), formatFloat(b.High[k]))
			}
			rec = append(rec, formatFloat(d.Value[t]))
			if d.Uncertainty != nil {
				rec = append(rec, formatFloat(d.Uncertainty[t]))
			}
			if d.Group != nil {
				rec = append(rec, strconv.Itoa(d.Group[t]))
			}
			return rec
		}); err != nil {
			return nil, err
		}
		files = append(files, d.File)
		if d.Covariance == nil {
			continue
		}
		header = []string{"index"}
		for t := range d.Covariance {
			header = append(header, strconv.Itoa(t))
		}
		if err := table(f, d.CovarianceFile, header, len(d.Covariance), func(t int, rec []string) []string {
			rec = append(rec, strconv.Itoa(t))
			for _, v := range d.Covariance[t] {
				rec = append(rec, formatFloat(v))
			}
			return rec
		}); err != nil {
			return nil, err
		}
		files = append(files, d.CovarianceFile)
	}
	return files, nil
}
