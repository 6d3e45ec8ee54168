package main

import (
	"bufio"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"unicode/utf8"

	"github.com/spf13/cobra"

	"github.com/desmear/desmear/binning"
)

type binsOptions struct {
	format    string
	locate    string
	locateSet bool // --locate was given, even if empty
}

func newBinsCommand(g *globalOptions) *cobra.Command {
	var o binsOptions
	cmd := &cobra.Command{
		Use:   "bins FILE.yaml",
		Short: "Print the global bin index of a binning scheme, or locate a point in it",
		Long: `bins reads a binning scheme (YAML) and prints its flattening: every
global bin with its region, whether it is a flow bin, its edges on each
axis and its volume (the product of its widths). In-range bins come first,
regions in order and row-major within a region (last axis fastest); flow
bins (under- and overflow) follow.

With --locate it prints the global bin of one point instead, as the first
field of its output, and exits with status 3 if the point is outside every
bin.`,
		Example: `  desmear bins testdata/scheme2d.yaml
  desmear bins testdata/scheme2d.yaml --format csv > bins.csv
  desmear bins testdata/scheme2d.yaml --locate y=1.2,pt=35`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			o.locateSet = cmd.Flags().Changed("locate")
			return runBins(g, &o, args[0])
		},
	}
	f := cmd.Flags()
	f.StringVar(&o.format, "format", "table", `output format: "table" (aligned, for reading) or "csv" (header index,region,flow,<axis>_bin,<axis>_low,<axis>_high,...,volume)`)
	f.StringVar(&o.locate, "locate", "", `locate one point, given as axis=value pairs separated by commas, e.g. "y=1.2,pt=35"; every axis of the scheme needs a value`)
	return cmd
}

func runBins(g *globalOptions, o *binsOptions, path string) error {
	if o.format != "table" && o.format != "csv" {
		return usagef("--format %q: use table or csv", o.format)
	}
	s, err := readScheme(path)
	if err != nil {
		return err
	}
	lo, hi := 0, s.Len() // the bins to print
	if o.locateSet {
		x, err := parsePoint(s, o.locate)
		if err != nil {
			return err
		}
		b := s.Locate(x)
		if b == binning.Outside {
			if _, err := io.WriteString(g.stdout, "outside\n"); err != nil {
				return ioErr(err)
			}
			return inputErr(fmt.Errorf("point %s is outside every bin of %s: no region has an in-range bin or a switched-on flow bin containing it", formatPoint(s, x), path))
		}
		lo, hi = b, b+1
	}
	w := bufio.NewWriter(g.stdout)
	switch {
	case o.format == "csv":
		err = writeBinsCSV(w, s, lo, hi)
	case o.locateSet:
		_, err = fmt.Fprintf(w, "%d %s\n", lo, s.Label(lo))
	default:
		err = writeBinsTable(w, s, path)
	}
	if err == nil {
		err = w.Flush()
	}
	if err != nil {
		return ioErr(err)
	}
	return nil
}

// readScheme reads a scheme file, classifying bad content and a missing or
// unreadable file as bad input (as every command does, see openInput) and
// any other failure to read as an input/output failure.
func readScheme(path string) (*binning.Scheme, error) {
	f, err := openInput("binning scheme", path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	s, err := binning.Decode(f, path)
	var be *binning.Error
	switch {
	case err == nil:
		return s, nil
	case errors.As(err, &be):
		return nil, inputErr(err)
	}
	return nil, ioErr(fmt.Errorf("binning scheme: %w", err))
}

// parsePoint parses "a=1,b=2" into coordinates in the scheme's axis order.
func parsePoint(s *binning.Scheme, spec string) ([]float64, error) {
	names := s.AxisNames()
	x := make([]float64, len(names))
	seen := make([]bool, len(names))
	for _, part := range strings.Split(spec, ",") {
		name, val, ok := strings.Cut(strings.TrimSpace(part), "=")
		if !ok {
			return nil, usagef("--locate %q: %q is not axis=value (e.g. %s=1.5)", spec, part, names[0])
		}
		name = strings.TrimSpace(name)
		j := s.AxisIndex(name)
		if j < 0 {
			return nil, usagef("--locate %q: the scheme has no axis %q; its axes are %s", spec, name, strings.Join(names, ", "))
		}
		if seen[j] {
			return nil, usagef("--locate %q: axis %q given twice", spec, name)
		}
		v, err := strconv.ParseFloat(strings.TrimSpace(val), 64)
		if err != nil {
			return nil, usagef("--locate %q: value %q of %s is not a number", spec, val, name)
		}
		x[j], seen[j] = v, true
	}
	var missing []string
	for j, ok := range seen {
		if !ok {
			missing = append(missing, names[j])
		}
	}
	if missing != nil {
		return nil, usagef("--locate %q: no value for %s; give every axis of the scheme (%s)", spec, strings.Join(missing, ", "), strings.Join(names, ", "))
	}
	return x, nil
}

func formatPoint(s *binning.Scheme, x []float64) string {
	parts := make([]string, len(x))
	for j, n := range s.AxisNames() {
		parts[j] = n + "=" + formatNumber(x[j])
	}
	return strings.Join(parts, ",")
}

// formatNumber prints a number in the shortest form that reads back
// exactly, with infinities as inf and -inf.
func formatNumber(v float64) string {
	switch {
	case math.IsInf(v, 1):
		return "inf"
	case math.IsInf(v, -1):
		return "-inf"
	}
	return strconv.FormatFloat(v, 'g', -1, 64)
}

func binName(i int) string {
	switch i {
	case binning.UnderflowBin:
		return "underflow"
	case binning.OverflowBin:
		return "overflow"
	case binning.AnyBin:
		return "any"
	}
	return strconv.Itoa(i)
}

// writeBinsCSV writes the header and one row per global bin lo..hi-1.
func writeBinsCSV(w io.Writer, s *binning.Scheme, lo, hi int) error {
	names := s.AxisNames()
	cw := csv.NewWriter(w)
	head := []string{"index", "region", "flow"}
	for _, n := range names {
		head = append(head, n+"_bin", n+"_low", n+"_high")
	}
	head = append(head, "volume")
	if err := cw.Write(head); err != nil {
		return err
	}
	row := make([]string, len(head))
	for g := lo; g < hi; g++ {
		b := s.Bin(g)
		clear(row)
		row[0], row[1], row[2] = strconv.Itoa(g), b.RegionName, strconv.FormatBool(b.Flow)
		for k, n := range b.Axes {
			j := 3 + 3*s.AxisIndex(n)
			row[j], row[j+1], row[j+2] = binName(b.Index[k]), formatNumber(b.Low[k]), formatNumber(b.High[k])
		}
		row[len(row)-1] = formatNumber(b.Volume)
		if err := cw.Write(row); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// writeBinsTable writes a summary line and an aligned table of all bins.
func writeBinsTable(w io.Writer, s *binning.Scheme, path string) error {
	names := s.AxisNames()
	axes := make([]string, len(names))
	for j, n := range names {
		axes[j] = n
		if u, _ := s.AxisUnit(n); u != "" {
			axes[j] += " [" + u + "]"
		}
	}
	regs := make([]string, len(s.Regions()))
	for r, reg := range s.Regions() {
		lo, hi := s.Span(r)
		flo, fhi := s.FlowSpan(r)
		regs[r] = fmt.Sprintf("%s (%d bins %s, %d flow bins%s)", reg.Name(), hi-lo, span(lo, hi), fhi-flo, spanIf(flo, fhi))
	}
	fmt.Fprintf(w, "# %s: %d global bins, %d in range (0-%d) and %d flow\n", path, s.Len(), s.InRange(), s.InRange()-1, s.Len()-s.InRange())
	fmt.Fprintf(w, "# axes: %s\n", strings.Join(axes, ", "))
	fmt.Fprintf(w, "# regions: %s\n", strings.Join(regs, "; "))
	// The columns are sized in a first pass over the bins, so that the
	// table streams instead of being held whole (as text/tabwriter would).
	head := append(append([]string{"index", "region", "flow"}, axes...), "volume")
	row := make([]string, len(head))
	fill := func(g int) {
		b := s.Bin(g)
		row[0], row[1], row[2] = strconv.Itoa(g), b.RegionName, "-"
		if b.Flow {
			row[2] = "flow"
		}
		for j := range names {
			row[3+j] = "."
		}
		for k, n := range b.Axes {
			row[3+s.AxisIndex(n)] = tableCell(b.Index[k], b.Low[k], b.High[k])
		}
		row[len(row)-1] = formatNumber(b.Volume)
	}
	width := make([]int, len(head)-1) // the last column is not padded
	measure := func(cells []string) {
		for j := range width {
			width[j] = max(width[j], utf8.RuneCountInString(cells[j]))
		}
	}
	measure(head)
	for g := range s.Len() {
		fill(g)
		measure(row)
	}
	var line []byte
	write := func(cells []string) error {
		line = line[:0]
		for j, c := range cells[:len(width)] {
			line = append(line, c...)
			for range width[j] - utf8.RuneCountInString(c) + 2 {
				line = append(line, ' ')
			}
		}
		line = append(line, cells[len(width)]...)
		line = append(line, '\n')
		_, err := w.Write(line)
		return err
	}
	if err := write(head); err != nil {
		return err
	}
	for g := range s.Len() {
		fill(g)
		if err := write(row); err != nil {
			return err
		}
	}
	return nil
}

// span shows the non-empty range lo..hi-1.
func span(lo, hi int) string { return fmt.Sprintf("%d-%d", lo, hi-1) }

func spanIf(lo, hi int) string {
	if hi <= lo {
		return ""
	}
	return " " + span(lo, hi)
}

// tableCell shows one axis of a bin: its number and interval.
func tableCell(i int, lo, hi float64) string {
	switch i {
	case binning.AnyBin:
		return "any"
	case binning.UnderflowBin:
		return "under (-inf," + formatNumber(hi) + ")"
	case binning.OverflowBin:
		return "over [" + formatNumber(lo) + ",inf)"
	}
	return fmt.Sprintf("%d [%s,%s)", i, formatNumber(lo), formatNumber(hi))
}
