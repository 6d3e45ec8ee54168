package main

import (
	"context"
	"encoding/csv"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"text/tabwriter"
)

// runBinsCLI runs desmear bins with args (see runCLI).
func runBinsCLI(t *testing.T, args ...string) (code int, stdout, stderr string) {
	t.Helper()
	return runCLI(t, context.Background(), append([]string{"bins"}, args...)...)
}

const scheme2d = "../../testdata/scheme2d.yaml"

func TestBinsTable(t *testing.T) {
	code, out, errs := runBinsCLI(t, scheme2d)
	if code != exitOK {
		t.Fatalf("exit %d, stderr %s", code, errs)
	}
	lines := strings.Split(strings.TrimRight(out, "\n"), "\n")
	// Three summary lines, a header and one line per global bin (20).
	if len(lines) != 3+1+20 {
		t.Fatalf("%d lines, want 24:\n%s", len(lines), out)
	}
	if !strings.HasPrefix(lines[0], "# "+scheme2d+": 20 global bins, 13 in range") {
		t.Errorf("summary %q", lines[0])
	}
	if f := strings.Fields(lines[3]); strings.Join(f, " ") != "index region flow y pt [GeV] volume" {
		t.Errorf("header %q", lines[3])
	}
	// Bin 5 is y bin 1 [0.5,1), pt bin 1 [30,50) of that slice, volume 0.5*20.
	if f := strings.Fields(lines[4+5]); strings.Join(f, " ") != "5 central - 1 [0.5,1) 1 [30,50) 10" {
		t.Errorf("bin 5 line %q", lines[4+5])
	}
	if f := strings.Fields(lines[4+19]); strings.Join(f, " ") != "19 central flow over [1.5,inf) any inf" {
		t.Errorf("bin 19 line %q", lines[4+19])
	}
}

func TestBinsCSV(t *testing.T) {
	code, out, errs := runBinsCLI(t, "../../testdata/scheme3d.yaml", "--format", "csv")
	if code != exitOK {
		t.Fatalf("exit %d, stderr %s", code, errs)
	}
	rows, err := csv.NewReader(strings.NewReader(out)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	head := "index,region,flow,y_bin,y_low,y_high,pt_bin,pt_low,pt_high,mass_bin,mass_low,mass_high,volume"
	if strings.Join(rows[0], ",") != head {
		t.Errorf("header %q, want %q", strings.Join(rows[0], ","), head)
	}
	for i, r := range rows[1:] {
		if r[0] != strconv.Itoa(i) {
			t.Fatalf("row %d has index %s", i+1, r[0])
		}
	}
	// The sideband region has no pt axis: those columns are empty, and its
	// axes are written in the scheme's column order (y before mass).
	var side []string
	for _, r := range rows[1:] {
		if r[1] == "sideband" && r[2] == "false" {
			side = r
			break
		}
	}
	if got := strings.Join(side[3:], ","); got != "0,0,2,,,,0,40,60,40" {
		t.Errorf("first sideband row %q", got)
	}
}

func TestBinsLocate(t *testing.T) {
	code, out, errs := runBinsCLI(t, scheme2d, "--locate", "y=1.2,pt=35")
	if code != exitOK || out != "7 central y[1,1.5) pt[20,40)\n" {
		t.Errorf("exit %d, output %q, stderr %q", code, out, errs)
	}
	// Order of the pairs does not matter; values on edges go to the bin above.
	code, out, _ = runBinsCLI(t, scheme2d, "--locate", "pt=30, y=0.5")
	if code != exitOK || strings.Fields(out)[0] != "5" {
		t.Errorf("exit %d, output %q", code, out)
	}
	code, out, _ = runBinsCLI(t, scheme2d, "--locate", "y=0.2,pt=inf", "--format", "csv")
	if code != exitOK || !strings.Contains(out, "\n14,central,true,0,0,0.5,overflow,110,inf,inf\n") {
		t.Errorf("exit %d, output %q", code, out)
	}
	code, out, errs = runBinsCLI(t, scheme2d, "--locate", "y=-1,pt=35")
	if code != exitInput || out != "outside\n" || !strings.Contains(errs, "outside every bin") {
		t.Errorf("outside point: exit %d, output %q, stderr %q", code, out, errs)
	}
	code, _, _ = runBinsCLI(t, scheme2d, "--locate", "y=nan,pt=35")
	if code != exitInput {
		t.Errorf("NaN point: exit %d, want %d", code, exitInput)
	}
}

func TestBinsErrors(t *testing.T) {
	dir := t.TempDir()
	bad := filepath.Join(dir, "bad.yaml")
	if err := os.WriteFile(bad, []byte("regions:\n  - name: a\n    axes:\n      - {name: x, edges: [0, 1], color: red}\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		args []string
		code int
		msg  string
	}{
		{[]string{}, exitUsage, "arg"},
		{[]string{scheme2d, "--format", "json"}, exitUsage, "--format"},
		{[]string{scheme2d, "--locate", "y=1"}, exitUsage, "no value for pt"},
		{[]string{scheme2d, "--locate", "y=1,pt=2,eta=3"}, exitUsage, "no axis \"eta\""},
		{[]string{scheme2d, "--locate", "y=1,pt=x"}, exitUsage, "not a number"},
		{[]string{scheme2d, "--locate", "y=1,y=2,pt=3"}, exitUsage, "twice"},
		{[]string{scheme2d, "--locate", "y"}, exitUsage, "axis=value"},
		// An empty point (e.g. from an unset shell variable) is an error,
		// not a request for the whole table.
		{[]string{scheme2d, "--locate", ""}, exitUsage, "axis=value"},
		{[]string{filepath.Join(dir, "missing.yaml")}, exitInput, "missing.yaml"}, // a missing input file is bad input, as for every command
		{[]string{bad}, exitInput, bad + ":4:"},
		{[]string{dir}, exitIO, "binning scheme: "}, // a folder opens but cannot be read
	}
	for _, c := range cases {
		code, out, errs := runBinsCLI(t, c.args...)
		if code != c.code || !strings.Contains(errs, c.msg) {
			t.Errorf("bins %v: exit %d, stderr %q; want exit %d and a message containing %q", c.args, code, errs, c.code, c.msg)
		}
		if code != exitInput && out != "" {
			t.Errorf("bins %v: printed %q on stdout", c.args, out)
		}
	}
}

// A wrong number of arguments is a usage error that shows how the
// command is called, as a flag error does.
func TestArgumentErrorsSayUsage(t *testing.T) {
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"bins"}, `usage: desmear bins FILE.yaml [flags] (see "desmear bins --help")`},
		{[]string{"response", "a.yaml", "b.yaml"}, `usage: desmear response ANALYSIS.yaml [flags] (see "desmear response --help")`},
		{[]string{"demo", "extra"}, `(see "desmear demo --help")`},
		{[]string{"unfold", "a.yaml", "b.yaml"}, `(see "desmear unfold --help")`},
	} {
		code, out, errs := runCLI(t, context.Background(), c.args...)
		if code != exitUsage || !strings.Contains(errs, c.want) || out != "" {
			t.Errorf("desmear %v: exit %d, stdout %q, stderr %q; want exit %d and %q", c.args, code, out, errs, exitUsage, c.want)
		}
	}
}

// failWriter fails every write, as a full disk or a closed pipe does.
type failWriter struct{}

func (failWriter) Write([]byte) (int, error) { return 0, errors.New("no space left on device") }

// A failure to write the output is an input/output failure, whatever is printed.
func TestBinsWriteFailure(t *testing.T) {
	for _, args := range [][]string{
		{scheme2d},
		{scheme2d, "--format", "csv"},
		{scheme2d, "--locate", "y=1.2,pt=35"},
		{scheme2d, "--locate", "y=-1,pt=35"}, // outside: the "outside" line fails first
	} {
		var stderr strings.Builder
		code := run(context.Background(), append([]string{"bins"}, args...), strings.NewReader(""), failWriter{}, &stderr)
		if code != exitIO || !strings.Contains(stderr.String(), "no space left") {
			t.Errorf("bins %v to a failing stdout: exit %d, stderr %q; want exit %d", args, code, stderr.String(), exitIO)
		}
	}
}

// The streamed table is aligned as text/tabwriter (Go standard library,
// the reference) aligns the same cells, also with a region name and a
// unit of non-ASCII letters, which count one column each.
func TestBinsTableAlignment(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "micro.yaml")
	yaml := "regions:\n  - name: entrée-sortie\n    axes:\n      - {name: r, unit: µm, edges: [0, 5, 12.5, 100], overflow: true}\n      - {name: z, unit: mm, edges: [-300, 0, 300]}\n"
	if err := os.WriteFile(path, []byte(yaml), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, file := range []string{scheme2d, "../../testdata/scheme3d.yaml", path} {
		code, out, errs := runBinsCLI(t, file)
		if code != exitOK {
			t.Fatalf("%s: exit %d, stderr %s", file, code, errs)
		}
		s, err := readScheme(file)
		if err != nil {
			t.Fatal(err)
		}
		var want strings.Builder
		tw := tabwriter.NewWriter(&want, 0, 0, 2, ' ', 0)
		head := []string{"index", "region", "flow"}
		for _, n := range s.AxisNames() {
			if u, _ := s.AxisUnit(n); u != "" {
				n += " [" + u + "]"
			}
			head = append(head, n)
		}
		fmt.Fprintln(tw, strings.Join(append(head, "volume"), "\t"))
		for g := range s.Len() {
			b := s.Bin(g)
			cells := []string{strconv.Itoa(g), b.RegionName, "-"}
			if b.Flow {
				cells[2] = "flow"
			}
			for range s.AxisNames() {
				cells = append(cells, ".")
			}
			for k, n := range b.Axes {
				cells[3+s.AxisIndex(n)] = tableCell(b.Index[k], b.Low[k], b.High[k])
			}
			fmt.Fprintln(tw, strings.Join(append(cells, formatNumber(b.Volume)), "\t"))
		}
		tw.Flush()
		lines := strings.SplitAfterN(out, "\n", 4)
		if len(lines) != 4 || lines[3] != want.String() {
			t.Errorf("%s: table\n%s\nwant (text/tabwriter)\n%s", file, out, want.String())
		}
	}
}
