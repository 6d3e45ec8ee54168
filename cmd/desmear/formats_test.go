package main

import (
	"bytes"
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"go-hep.org/x/hep/groot"
	"go-hep.org/x/hep/groot/riofs"
	"go-hep.org/x/hep/groot/root"

	"github.com/desmear/desmear/unfold/result"
)

const formatsTruth = `regions:
  - name: central
    axes:
      - {name: y, edges: [0, 1, 2]}
      - {name: pt, edges: [0, 1, 2, 4], overflow: true}
`

// rootObjects reads every histogram of the ROOT file at path, keyed by
// its path inside the file.
func rootObjects(t *testing.T, path string) map[string]root.Object {
	t.Helper()
	f, err := groot.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	objs := map[string]root.Object{}
	err = riofs.Walk(f, func(p string, obj root.Object, err error) error {
		if err != nil {
			return err
		}
		if strings.HasPrefix(obj.Class(), "TH") {
			// p starts with the name the file was written under.
			objs[p[strings.LastIndex(p, ".root/")+len(".root/"):]] = obj
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return objs
}

// The plain-table mode with --truth-binning writes the region tables and
// the ROOT histograms of the analysis mode, through the same writers: an
// analysis without purity (its reco axes are named apart from the truth
// axes) and without luminosity, unfolded again in plain-table mode from
// the tables of "desmear response --tables" with the same settings,
// gives the same estimate (TestAnalysisEndToEnd), so region-central.csv
// must be the same bytes and result.root the same histograms.
func TestPlainWritesAnalysisFormats(t *testing.T) {
	path := writeCLIAnalysis(t)
	dir := filepath.Dir(path)
	src, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	text := string(src)
	truthStart, recoStart := strings.Index(text, "  truth:\n"), strings.Index(text, "  reco: reco.yaml")
	text = text[:truthStart] + "  truth: truth.yaml\n" + text[recoStart:]
	text = strings.Replace(text, "reco: {y: abs(y_r), pt: pt_r}", "reco: {yr: abs(y_r), ptr: pt_r}", 1)
	// Without the background's scale uncertainty (a correlated source the
	// tables cannot carry, method.md §21) the two modes write the same files.
	text = strings.Replace(text, "    scale_uncertainty: 0.2\n", "", 1)
	reco, err := os.ReadFile(filepath.Join(dir, "reco.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	recoText := strings.NewReplacer("name: y,", "name: yr,", "name: pt,", "name: ptr,").Replace(string(reco))
	for name, content := range map[string]string{"analysis.yaml": text, "truth.yaml": formatsTruth, "reco.yaml": recoText} {
		if err := os.WriteFile(filepath.Join(dir, name), []byte(content), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	tdir := filepath.Join(dir, "tables")
	if code, _, stderr := runCLI(t, context.Background(), "response", path, "--tables", tdir); code != 0 {
		t.Fatalf("response: exit %d\n%s", code, stderr)
	}
	if code, _, stderr := runCLI(t, context.Background(), "unfold", path); code != 0 {
		t.Fatalf("unfold analysis: exit %d\n%s", code, stderr)
	}
	plain := filepath.Join(dir, "plain")
	code, _, stderr := runCLI(t, context.Background(), "unfold", "--response", filepath.Join(tdir, "response.csv"), "--generated", filepath.Join(tdir, "generated.csv"),
		"--background", filepath.Join(tdir, "background.csv"), "--data", filepath.Join(dir, "n.csv"), "--truth-binning", filepath.Join(dir, "truth.yaml"),
		"--iterations", "3", "--covariance", "full", "--out", plain)
	if code != 0 {
		t.Fatalf("plain unfold: exit %d\n%s", code, stderr)
	}
	analysisJSON, err := os.ReadFile(filepath.Join(dir, "result", "result.json"))
	if err != nil {
		t.Fatal(err)
	}
	if bytes.Contains(analysisJSON, []byte(`"purity"`)) || bytes.Contains(analysisJSON, []byte(`"luminosity"`)) {
		t.Fatal("the analysis has a purity or a luminosity, which the plain-table mode cannot have")
	}
	a, err := os.ReadFile(filepath.Join(dir, "result", "region-central.csv"))
	if err != nil {
		t.Fatal(err)
	}
	p, err := os.ReadFile(filepath.Join(plain, "region-central.csv"))
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(a, p) {
		t.Errorf("region-central.csv differs:\nanalysis\n%s\nplain\n%s", a, p)
	}
	ha, hp := rootObjects(t, filepath.Join(dir, "result", "result.root")), rootObjects(t, filepath.Join(plain, "result.root"))
	if len(ha) == 0 || len(ha) != len(hp) {
		t.Fatalf("%d histograms in the analysis's result.root, %d in the plain one", len(ha), len(hp))
	}
	for name, h := range ha {
		if !reflect.DeepEqual(h, hp[name]) {
			t.Errorf("histogram %s differs", name)
		}
	}
}

// --formats chooses the files of a plain-table result folder by the
// names of output.formats: result.json is always written, an unknown
// name is a usage error before anything is read, and without
// --truth-binning the formats that need one are left out.
func TestPlainFormats(t *testing.T) {
	dir := writeFiles(t, t.TempDir(), oracleD)
	for _, c := range []struct {
		formats, want string
	}{
		{"", "history.csv plots reco-bins.csv report.html response.csv result.csv result.json truth-bins.csv"},
		{"json", "result.json"},
		{"csv,regions,root", "result.csv result.json"},
	} {
		out := filepath.Join(dir, "out-"+strings.ReplaceAll(c.formats, ",", "-"))
		args := oracleDArgs(dir, out)
		if c.formats != "" {
			args = append(args, "--formats", c.formats)
		}
		if code, _, stderr := runCLI(t, context.Background(), args...); code != 0 {
			t.Fatalf("--formats %q: exit %d\n%s", c.formats, code, stderr)
		}
		if got := strings.Join(dirNames(t, out), " "); got != c.want {
			t.Errorf("--formats %q wrote %s, want %s", c.formats, got, c.want)
		}
	}
	out := filepath.Join(dir, "bad")
	code, _, stderr := runCLI(t, context.Background(), append(oracleDArgs(dir, out), "--formats", "json,pdf")...)
	if code != exitUsage || !strings.Contains(stderr, `unknown format "pdf" (known: `+strings.Join(result.Formats(), ", ")+`)`) {
		t.Errorf("--formats json,pdf: exit %d, %s", code, stderr)
	}
	if _, err := os.Stat(out); err == nil {
		t.Error("a result folder was written with an unknown format")
	}
}

// --method takes the names of the methods package; the result's
// settings name the method that ran; an unknown name is a usage error
// that lists the choices.
func TestPlainMethod(t *testing.T) {
	dir := writeFiles(t, t.TempDir(), oracleD)
	out := filepath.Join(dir, "out")
	if code, _, stderr := runCLI(t, context.Background(), append(oracleDArgs(dir, out), "--method", "dagostini")...); code != 0 {
		t.Fatalf("--method dagostini: exit %d\n%s", code, stderr)
	}
	b, err := os.ReadFile(filepath.Join(out, "result.json"))
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Settings struct {
			Method string `json:"method"`
		} `json:"settings"`
	}
	if err := json.Unmarshal(b, &doc); err != nil || doc.Settings.Method != "dagostini" {
		t.Errorf("settings.method %q (%v), want dagostini", doc.Settings.Method, err)
	}
	code, _, stderr := runCLI(t, context.Background(), append(oracleDArgs(dir, filepath.Join(dir, "bad")), "--method", "lucky")...)
	if code != exitUsage || !strings.Contains(stderr, "dagostini") {
		t.Errorf("--method lucky: exit %d, %s", code, stderr)
	}
}

// --root-slice-axis chooses the axis of result.root's slice histograms:
// along a (the first axis) one TH1D per bin of b, named by it; without
// it one per bin of a along b (the last axis). It needs --truth-binning
// and an axis of it, or it is a usage error before anything is written.
func TestPlainRootSliceAxis(t *testing.T) {
	dir := writeFiles(t, t.TempDir(), oracleD)
	truth := filepath.Join(dir, "truth.yaml")
	if err := os.WriteFile(truth, []byte("regions:\n  - name: c\n    axes:\n      - {name: a, edges: [0, 1, 2, 3]}\n      - {name: b, edges: [0, 1]}\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		axis string
		want []string
	}{
		{"a", []string{"c/counts_b0", "c/density_b0"}},
		{"", []string{"c/counts_a0", "c/counts_a1", "c/counts_a2"}},
	} {
		out := filepath.Join(dir, "out-"+c.axis)
		args := append(oracleDArgs(dir, out), "--truth-binning", truth, "--formats", "root")
		if c.axis != "" {
			args = append(args, "--root-slice-axis", c.axis)
		}
		if code, _, stderr := runCLI(t, context.Background(), args...); code != 0 {
			t.Fatalf("--root-slice-axis %q: exit %d\n%s", c.axis, code, stderr)
		}
		objs := rootObjects(t, filepath.Join(out, "result.root"))
		for _, name := range c.want {
			if objs[name] == nil {
				t.Errorf("--root-slice-axis %q: no %s in result.root", c.axis, name)
			}
		}
	}
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"--truth-binning", truth, "--root-slice-axis", "z"}, `--root-slice-axis: the truth binning has no axis "z" (its axes: a, b)`},
		{[]string{"--root-slice-axis", "a"}, "--root-slice-axis needs --truth-binning"},
	} {
		out := filepath.Join(dir, "bad")
		code, _, stderr := runCLI(t, context.Background(), append(oracleDArgs(dir, out), c.args...)...)
		if code != exitUsage || !strings.Contains(stderr, c.want) {
			t.Errorf("%v: exit %d, %s", c.args, code, stderr)
		}
		if _, err := os.Stat(out); err == nil {
			t.Errorf("%v: a result folder was written", c.args)
		}
	}
}
