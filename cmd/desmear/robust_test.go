package main

import (
	"context"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io/fs"
	stdmaps "maps"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/parquet-go/parquet-go"
)

// checkRefusal checks a refusal through the command: the exit status,
// one line on standard error prefixed "desmear:" holding want, no stack
// trace, nothing on standard output and no folder left at out.
func checkRefusal(t *testing.T, name string, code int, stdout, stderr string, wantCode int, want, out string) {
	t.Helper()
	line := strings.TrimSuffix(stderr, "\n")
	switch {
	case code != wantCode:
		t.Errorf("%s: exit %d, want %d (stderr %q)", name, code, wantCode, stderr)
	case !strings.Contains(line, want):
		t.Errorf("%s: stderr %q, want %q", name, stderr, want)
	case strings.Contains(line, "\n") || !strings.HasPrefix(line, "desmear: "):
		t.Errorf("%s: stderr is not one line prefixed \"desmear: \": %q", name, stderr)
	case strings.Contains(stderr, "goroutine "):
		t.Errorf("%s: a stack trace: %q", name, stderr)
	case stdout != "":
		t.Errorf("%s: stdout %q", name, stdout)
	}
	if out != "" {
		if _, err := os.Stat(out); err == nil {
			t.Errorf("%s: %s was left behind", name, out)
		}
	}
}

// variants returns a function writing beside the analysis file at path
// a copy with old replaced by new, named PREFIXn.yaml for the n-th call,
// and returning its path.
func variants(t *testing.T, path, prefix string) func(old, new string) string {
	t.Helper()
	src, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	return func(old, new string) string {
		n++
		if !strings.Contains(string(src), old) {
			t.Fatalf("%q not in the analysis file", old)
		}
		p := filepath.Join(filepath.Dir(path), prefix+strconv.Itoa(n)+".yaml")
		if err := os.WriteFile(p, []byte(strings.Replace(string(src), old, new, 1)), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
}

// A saved response whose files changed after it was written is refused,
// the message naming the file; a version 1 bundle is refused with the
// advice to build it again.
func TestSavedResponseIntegrity(t *testing.T) {
	path := writeCLIAnalysis(t)
	dir := filepath.Dir(path)
	src, _ := os.ReadFile(path)
	os.WriteFile(path, []byte(strings.Replace(string(src), "simulation:", "response: saved\nsimulation:", 1)), 0o644)
	if code, _, stderr := runCLI(t, context.Background(), "response", path); code != 0 {
		t.Fatalf("desmear response: exit %d, %s", code, stderr)
	}
	saved := filepath.Join(dir, "saved")
	files := map[string][]byte{}
	for _, name := range []string{"response.json", "migrations.dsm", "manifest.sha256"} {
		b, err := os.ReadFile(filepath.Join(saved, name))
		if err != nil {
			t.Fatal(err)
		}
		files[name] = b
	}
	for _, c := range []struct {
		name, file string
		change     func([]byte) []byte
		want       string
	}{
		{"an added digit", "response.json", func(b []byte) []byte {
			return []byte(strings.Replace(string(b), `"truth_bins": `, `"truth_bins": 9`, 1))
		}, "response.json: changed since the bundle was written"},
		{"a flipped byte", "migrations.dsm", func(b []byte) []byte { b[len(b)/2] ^= 1; return b }, "migrations.dsm: changed since the bundle was written"},
		{"no manifest", "manifest.sha256", nil, "manifest.sha256: missing"},
		{"version 1", "response.json", func(b []byte) []byte {
			return []byte(strings.Replace(string(b), `"format_version": 3`, `"format_version": 1`, 1))
		}, "format version 1, which carries no checksums and is no longer read; build the response again"},
	} {
		p := filepath.Join(saved, c.file)
		if c.change == nil {
			os.Remove(p)
		} else {
			b := c.change(append([]byte(nil), files[c.file]...))
			if string(b) == string(files[c.file]) {
				t.Fatalf("%s: no change made", c.name)
			}
			os.WriteFile(p, b, 0o644)
		}
		code, stdout, stderr := runBounded(t, c.name, "unfold", path)
		checkRefusal(t, c.name, code, stdout, stderr, exitInput, c.want, filepath.Join(dir, "result"))
		os.WriteFile(p, files[c.file], 0o644)
	}
	if code, _, stderr := runCLI(t, context.Background(), "unfold", path); code != 0 {
		t.Errorf("the restored bundle: exit %d, %s", code, stderr)
	}
	os.RemoveAll(filepath.Join(dir, "result"))
	// With both response and simulation, a simulation that is not the
	// one the response was built from is refused, not ignored.
	sim := filepath.Join(dir, "sim.csv")
	b, _ := os.ReadFile(sim)
	os.WriteFile(sim, append(b, b[strings.IndexByte(string(b), '\n')+1:]...), 0o644)
	code, stdout, stderr := runBounded(t, "another simulation", "unfold", path)
	checkRefusal(t, "another simulation", code, stdout, stderr, exitInput, "analysis.yaml:15: simulation[0].file: the saved response "+saved+" was not built from "+sim, filepath.Join(dir, "result"))
	if !strings.Contains(stderr, "desmear response") {
		t.Errorf("another simulation: no advice to rebuild: %q", stderr)
	}
}

// Every setting is taken as written or refused: numbers that are not
// whole for integer keys, an explicit 0 that would mean the default, a
// second YAML document, a number too large for a float64 in an events
// file. Each refusal is one line naming the file and line, exit 3, and
// no result folder.
func TestSettingsTakenAsWritten(t *testing.T) {
	path := writeCLIAnalysis(t)
	dir := filepath.Dir(path)
	bad := variants(t, path, "set")
	reco, _ := os.ReadFile(filepath.Join(dir, "reco.yaml"))
	os.WriteFile(filepath.Join(dir, "reco2.yaml"), append(reco, "---\nregions: []\n"...), 0o644)
	sim, _ := os.ReadFile(filepath.Join(dir, "sim.csv"))
	lines := strings.SplitN(string(sim), "\n", 3)
	fields := strings.Split(lines[1], ",")
	fields[3] = "1e400"
	lines[1] = strings.Join(fields, ",")
	os.WriteFile(filepath.Join(dir, "huge.csv"), []byte(strings.Join(lines, "\n")), 0o644)
	for _, c := range []struct {
		cmd, file, want string
	}{
		{"unfold", bad("iterations: 3", "iterations: 2.5"), "set1.yaml:26: unfolding.iterations: value 2.5 is a number, want a whole number"},
		{"unfold", bad("covariance: full", "covariance: full\n  probes: 0"), "set2.yaml:29: uncertainty.probes: 0 is not allowed"},
		{"unfold", bad("folder: result", "folder: result\n  luminosity: 0"), "set3.yaml:31: output.luminosity: 0 is not allowed"},
		{"unfold", bad("iterations: 3", "iterations: 0"), "set4.yaml:26: unfolding.iterations: 0 is not allowed"},
		{"unfold", bad("output:\n", "processing:\n  workers: 1.5\noutput:\n"), "set5.yaml:30: processing.workers: value 1.5 is a number, want a whole number"},
		{"unfold", bad("reco: reco.yaml", "reco: reco2.yaml"), "reco2.yaml:6: a second YAML document (---) is not allowed"},
		{"unfold", bad("folder: result\n", "folder: result\n---\ntitle: another\n"), "set7.yaml:31: a second YAML document (---) is not allowed"},
		{"response", bad("file: sim.csv", "file: huge.csv"), `huge.csv:2:` + strconv.Itoa(len(strings.Join(fields[:3], ","))+2) + `: column "pt_r": "1e400" is too large for a 64-bit float`},
	} {
		code, stdout, stderr := runBounded(t, c.file, c.cmd, c.file)
		checkRefusal(t, filepath.Base(c.file), code, stdout, stderr, exitInput, c.want, filepath.Join(dir, "result"))
	}
	if _, err := os.Stat(filepath.Join(dir, "response")); err == nil {
		t.Error("a response folder was left behind")
	}
}

// Messages say what to fix, the same way for every input format: a
// missing events file, whatever its format, and the operators of other
// languages in expressions.
func TestMessagesSayWhatToFix(t *testing.T) {
	path := writeCLIAnalysis(t)
	dir := filepath.Dir(path)
	bad := variants(t, path, "msg")
	for _, c := range []struct{ file, want string }{
		{bad("file: sim.csv", "file: gone.root"), "msg1.yaml:14: simulation[0].file: cannot open the events file: events: open " + filepath.Join(dir, "gone.root") + ": no such file or directory"},
		{bad("file: sim.csv", "file: gone.parquet"), "msg2.yaml:14: simulation[0].file: cannot open the events file: events: open " + filepath.Join(dir, "gone.parquet") + ": no such file or directory"},
		{bad("file: sim.csv", "file: gone.csv"), "msg3.yaml:14: simulation[0].file: cannot open the events file: events: open " + filepath.Join(dir, "gone.csv") + ": no such file or directory"},
		{bad("pass_r && pt_r", "pass_r and pt_r"), `"and" is not an operator: write && for and`},
		{bad("pass_r && pt_r", "pass_r & pt_r"), "for a logical and use &&"},
		{bad("weight: w", "weight: w ** 2"), "operator ** is not supported; for powers use pow(x, y)"},
	} {
		code, stdout, stderr := runBounded(t, c.file, "response", c.file)
		checkRefusal(t, filepath.Base(c.file), code, stdout, stderr, exitInput, c.want, filepath.Join(dir, "response"))
	}
}

// A demo run over an existing folder is refused before anything is
// generated (no "generating" line), and the folder is left as it was.
func TestDemoRefusesFolderFirst(t *testing.T) {
	out := filepath.Join(t.TempDir(), "demo")
	os.Mkdir(out, 0o755)
	notes := filepath.Join(out, "notes.txt")
	os.WriteFile(notes, []byte("keep"), 0o644)
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"demo", "--out", out}, "demo: " + out + " already exists (replace it with --force)"},
		{[]string{"demo", "--out", out, "--force"}, "so it is left alone"},
	} {
		code, stdout, stderr := runBounded(t, strings.Join(c.args, " "), c.args...)
		checkRefusal(t, strings.Join(c.args, " "), code, stdout, stderr, exitUsage, c.want, "")
		if b, err := os.ReadFile(notes); err != nil || string(b) != "keep" {
			t.Errorf("%v: the existing folder changed", c.args)
		}
	}
}

// desmear response does not need the data section it never uses; the
// unfolding refuses its absence, naming the key.
func TestResponseWithoutData(t *testing.T) {
	path := writeCLIAnalysis(t)
	dir := filepath.Dir(path)
	src, _ := os.ReadFile(path)
	if !strings.Contains(string(src), "data:\n  table: n.csv\n") {
		t.Fatal("no data section to remove")
	}
	os.WriteFile(path, []byte(strings.Replace(string(src), "data:\n  table: n.csv\n", "", 1)), 0o644)
	if code, _, stderr := runCLI(t, context.Background(), "response", path, "--out", filepath.Join(dir, "resp")); code != 0 {
		t.Fatalf("desmear response without data: exit %d, %s", code, stderr)
	}
	code, stdout, stderr := runBounded(t, "unfold without data", "unfold", path)
	checkRefusal(t, "unfold without data", code, stdout, stderr, exitInput, path+": data: missing: the unfolding needs the data", filepath.Join(dir, "result"))
}

// Non-finite results are numerical failures (exit 4) naming the
// quantity and the bin, not errors of writing the result.
func TestNonFiniteResultIsNumerical(t *testing.T) {
	path := writeCLIAnalysis(t)
	src, _ := os.ReadFile(path)
	os.WriteFile(path, []byte(strings.Replace(string(src), "folder: result", "folder: result\n  luminosity: 1e-320", 1)), 0o644)
	code, stdout, stderr := runBounded(t, "tiny luminosity", "unfold", path)
	checkRefusal(t, "tiny luminosity", code, stdout, stderr, exitNumerical, "unfold: numerical failure: the density of truth bin 0 (", filepath.Join(filepath.Dir(path), "result"))
}

// An analysis file with several problems lists each on its own line,
// every line prefixed "desmear: ".
func TestEveryErrorLinePrefixed(t *testing.T) {
	path := writeCLIAnalysis(t)
	src, _ := os.ReadFile(path)
	bad := strings.Replace(strings.Replace(string(src), "iterations: 3", "iterations: 2.5", 1), "covariance: full", "covariance: full\n  probes: 1.5", 1)
	os.WriteFile(path, []byte(bad), 0o644)
	code, _, stderr := runBounded(t, "two problems", "unfold", path)
	lines := strings.Split(strings.TrimSuffix(stderr, "\n"), "\n")
	if code != exitInput || len(lines) != 2 {
		t.Fatalf("exit %d, stderr %q: want exit 3 and two lines", code, stderr)
	}
	for i, want := range []string{"unfolding.iterations: value 2.5", "uncertainty.probes: value 1.5"} {
		if !strings.HasPrefix(lines[i], "desmear: ") || !strings.Contains(lines[i], want) {
			t.Errorf("line %d: %q, want the prefix and %q", i+1, lines[i], want)
		}
	}
}

// Sizes a file can ask for are bounded and checked before the memory is
// taken: each refusal names the key (or the file) and the limit, within
// the memory bound of runBounded.
func TestBoundedMemory(t *testing.T) {
	path := writeCLIAnalysis(t)
	dir := filepath.Dir(path)
	bad := variants(t, path, "mem")
	// One list of 10^4 edges used 10^4 times through an alias: 10^8
	// edges from a file of a few hundred kilobytes.
	var alias strings.Builder
	alias.WriteString("regions:\n  - name: r\n    axes:\n      - name: y\n        edges: &e [")
	for i := range 10000 {
		if i > 0 {
			alias.WriteString(", ")
		}
		alias.WriteString(strconv.Itoa(i))
	}
	alias.WriteString("]\n      - name: pt\n        edges_by_bin: [")
	for i := range 9999 {
		if i > 0 {
			alias.WriteString(", ")
		}
		alias.WriteString("*e")
	}
	alias.WriteString("]\n")
	os.WriteFile(filepath.Join(dir, "alias.yaml"), []byte(alias.String()), 0o644)
	for _, c := range []struct{ file, want string }{
		{bad("output:\n", "processing:\n  batch_size: 1000000000\noutput:\n"), "mem1.yaml:30: processing.batch_size: must be between 0 (the default) and 1048576 events"},
		{bad("output:\n", "processing:\n  workers: 100000\noutput:\n"), "mem2.yaml:30: processing.workers: must be between 0 (one per core) and 256"},
		{bad("reco: reco.yaml", "reco: /dev/zero"), "/dev/zero: larger than 64 MiB, the limit for a scheme file"},
		{bad("reco: reco.yaml", "reco: alias.yaml"), "alias.yaml:5:16: regions[0].axes[1].edges_by_bin[103]: more than 1048576 edges in the scheme (a list reused through a YAML alias counts each time)"},
		{"/dev/zero", "/dev/zero: larger than 16 MiB, the limit for an analysis file"},
	} {
		code, stdout, stderr := runBounded(t, c.file, "unfold", c.file)
		checkRefusal(t, filepath.Base(c.file), code, stdout, stderr, exitInput, c.want, filepath.Join(dir, "result"))
	}
}

// A column the file has but cannot deliver as one number per event is
// named with the reason, not reported as an unknown column.
func TestUnreadableColumnNamed(t *testing.T) {
	path := writeCLIAnalysis(t)
	dir := filepath.Dir(path)
	type row struct {
		W    float64   `parquet:"w"`
		List []float64 `parquet:"list"`
	}
	f, err := os.Create(filepath.Join(dir, "nested.parquet"))
	if err != nil {
		t.Fatal(err)
	}
	w := parquet.NewGenericWriter[row](f)
	if _, err := w.Write([]row{{W: 1, List: []float64{1, 2}}}); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	f.Close()
	src, _ := os.ReadFile(path)
	bad := strings.Replace(strings.Replace(string(src), "file: sim.csv", "file: nested.parquet", 1), "weight: w", "weight: list", 1)
	os.WriteFile(path, []byte(bad), 0o644)
	code, stdout, stderr := runBounded(t, "list column", "response", path)
	checkRefusal(t, "list column", code, stdout, stderr, exitInput, `analysis.yaml:15: simulation[0].weight: in "list": `+filepath.Join(dir, "nested.parquet")+`: column "list" cannot be read: it is a repeated (list) column`, filepath.Join(dir, "response"))
}

// treeSums returns the SHA-256 of every file under dir by its relative
// path.
func treeSums(t *testing.T, dir string) map[string]string {
	t.Helper()
	sums := map[string]string{}
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(dir, p)
		h := sha256.Sum256(b)
		sums[rel] = hex.EncodeToString(h[:])
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return sums
}

// desmear demo --force over an earlier demo folder that cannot be
// removed whole is an error (one line, exit 5) that leaves the earlier
// folder byte-identical and nothing beside it; a replacement that can go
// ahead installs inputs and result together (common practice: an
// immutable file cannot be unlinked, even by root).
func TestDemoForceWithoutLoss(t *testing.T) {
	parent := t.TempDir()
	out := filepath.Join(parent, "demo")
	args := []string{"demo", "--out", out, "--events", "20000", "--no-report", "-q"}
	if code, _, stderr := runCLI(t, context.Background(), args...); code != 0 {
		t.Fatalf("demo: exit %d, %s", code, stderr)
	}
	before := treeSums(t, out)
	stuck := filepath.Join(out, "result", "result.csv")
	if os.Geteuid() == 0 {
		if msg, err := exec.Command("chattr", "+i", stuck).CombinedOutput(); err != nil {
			t.Skipf("running as root and chattr +i is not available here (%v: %s)", err, msg)
		}
		t.Cleanup(func() { exec.Command("chattr", "-i", stuck).Run() })
	} else {
		os.Chmod(filepath.Join(out, "result"), 0o555)
		t.Cleanup(func() { os.Chmod(filepath.Join(out, "result"), 0o755) })
	}
	code, stdout, stderr := runCLI(t, context.Background(), append(args, "--force", "--seed", "5")...)
	checkRefusal(t, "demo --force over an unremovable folder", code, stdout, stderr, exitIO, "cannot be removed", "")
	if after := treeSums(t, out); !stdmaps.Equal(before, after) {
		t.Errorf("the earlier demo folder changed after the refused replacement")
	}
	if entries, _ := os.ReadDir(parent); len(entries) != 1 {
		t.Errorf("beside the demo folder after the refusal: %v", entries)
	}
	if os.Geteuid() == 0 {
		exec.Command("chattr", "-i", stuck).Run()
	} else {
		os.Chmod(filepath.Join(out, "result"), 0o755)
	}
	if code, _, stderr := runCLI(t, context.Background(), append(args, "--force", "--seed", "5")...); code != 0 {
		t.Fatalf("demo --force: exit %d, %s", code, stderr)
	}
	after := treeSums(t, out)
	if after["result/result.json"] == "" || after["analysis.yaml"] == "" || after["result/result.json"] == before["result/result.json"] {
		t.Errorf("demo --force did not install new inputs and a new result together")
	}
	if entries, _ := os.ReadDir(parent); len(entries) != 1 {
		t.Errorf("beside the demo folder after the replacement: %v", entries)
	}
	if b, _ := os.ReadFile(filepath.Join(out, "result", "result.json")); strings.Contains(string(b), "partial") {
		t.Errorf("result.json names the temporary folder")
	}
}

// The unexplained-data remedy through the command, on plain tables: 5
// reco × 2 truth bins, reco bins 3 and 4 reached by no truth bin and
// holding 5 and 2 of the 34 counts. Refused by default, the message
// naming every such bin with its count and the fraction of the data;
// with --unexplained drop the result records the dropped bins and
// equals, bit for bit, the result of the data table edited by hand
// (common practice: dropping unreachable bins, checked against the
// problem edited by hand).
func TestUnexplainedThroughCommand(t *testing.T) {
	dir := t.TempDir()
	write := func(name, content string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(content), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	resp := write("r.csv", "reco,truth,value\n0,0,10\n1,0,4\n0,1,2\n1,1,8\n2,1,3\n")
	gen := write("g.csv", "truth,value\n0,20\n1,20\n")
	data := write("n.csv", "reco,value\n0,12\n1,12\n2,3\n3,5\n4,2\n")
	dataHand := write("nh.csv", "reco,value\n0,12\n1,12\n2,3\n3,0\n4,0\n")
	args := func(n, out string, more ...string) []string {
		return append([]string{"unfold", "--response", resp, "--generated", gen, "--data", n, "--iterations", "3", "--out", filepath.Join(dir, out)}, more...)
	}
	ctx := context.Background()
	code, stdout, stderr := runBounded(t, "unexplained data", args(data, "refused")...)
	// 7 of the 34 counts, 20.6% (by hand).
	checkRefusal(t, "unexplained data", code, stdout, stderr, exitInput, "2 reco bins hold data that no truth bin reaches and no background explains, 7 in all (20.6% of the data): reco bin 3: 5, reco bin 4: 2", filepath.Join(dir, "refused"))
	if !strings.Contains(stderr, "--unexplained drop") || !strings.Contains(stderr, "n.csv:5:") {
		t.Errorf("the refusal does not name the flag and the first line: %q", stderr)
	}
	code, _, stderr = runCLI(t, ctx, args(data, "remedied", "--unexplained", "drop")...)
	if code != 0 {
		t.Fatalf("with the remedy: exit %d, %s", code, stderr)
	}
	if want := "dropped the data of 2 reco bins that no truth bin reaches, 7 in all (20.6% of the data): 3: 5, 4: 2"; !strings.Contains(stderr, want) {
		t.Errorf("stderr %q, want %q", stderr, want)
	}
	if code, _, stderr := runCLI(t, ctx, args(dataHand, "by-hand")...); code != 0 {
		t.Fatalf("the data edited by hand: exit %d, %s", code, stderr)
	}
	var got, want remediedResult
	readJSON(t, filepath.Join(dir, "remedied", "result.json"), &got)
	readJSON(t, filepath.Join(dir, "by-hand", "result.json"), &want)
	if !slices.Equal(got.Estimate, want.Estimate) || !slices.Equal(got.Uncertainty, want.Uncertainty) {
		t.Errorf("remedied estimate %v ± %v, by hand %v ± %v", got.Estimate, got.Uncertainty, want.Estimate, want.Uncertainty)
	}
	if got.Settings.Unexplained != "drop" || want.Remedies != nil {
		t.Errorf("settings recorded %+v; by-hand remedies %+v", got.Settings, want.Remedies)
	}
	if r := got.Remedies; r == nil || r.DroppedCount != 7 || r.DroppedFraction != 7.0/34 || len(r.DroppedBins) != 2 {
		t.Errorf("remedies recorded %+v, want bins 3 and 4, 7 counts, 7/34 of the data", got.Remedies)
	}
}

// remediedResult is the part of result.json the remedy tests read.
type remediedResult struct {
	Estimate    []float64 `json:"estimate"`
	Uncertainty []float64 `json:"uncertainty"`
	Settings    struct {
		NegativeCells string `json:"negative_cells"`
		Unexplained   string `json:"unexplained"`
	} `json:"settings"`
	Remedies *struct {
		ClippedCells []struct {
			Reco, Truth int
			Value       float64
		} `json:"clipped_cells"`
		ClippedWeight   float64 `json:"clipped_weight"`
		DroppedBins     []any   `json:"dropped_bins"`
		DroppedCount    float64 `json:"dropped_count"`
		DroppedFraction float64 `json:"dropped_fraction"`
	} `json:"remedies"`
}

// The negative-cell remedy through an analysis file whose simulated
// events from |y| < 1 that are reconstructed at |y| > 1.5 weigh −2
// (negative weights, as in next-to-leading-order samples): refused by
// default, naming the key; with unfolding.negative_cells: clip the run
// reports every clipped cell on stderr and records them in result.json,
// the weight removed equal to the sum of the clipped cells' values
// (common practice: clipping negative cells to zero).
func TestNegativeCellsThroughAnalysis(t *testing.T) {
	path := writeCLIAnalysis(t)
	dir := filepath.Dir(path)
	v := variants(t, path, "neg")
	neg := v("weight: w", "weight: w * (1 - 3 * (abs(y_t) < 1 && abs(y_r) > 1.5))")
	ctx := context.Background()
	code, stdout, stderr := runBounded(t, "negative cells", "unfold", neg)
	checkRefusal(t, "negative cells", code, stdout, stderr, exitInput, "negative migration cells", filepath.Join(dir, "result"))
	if !strings.Contains(stderr, "unfolding.negative_cells: clip") {
		t.Errorf("the refusal does not name the key: %q", stderr)
	}
	src, _ := os.ReadFile(neg)
	os.WriteFile(neg, []byte(strings.Replace(string(src), "iterations: 3", "iterations: 3\n  negative_cells: clip", 1)), 0o644)
	code, _, stderr = runCLI(t, ctx, "unfold", neg)
	if code != 0 {
		t.Fatalf("with negative_cells: clip: exit %d, %s", code, stderr)
	}
	var got remediedResult
	readJSON(t, filepath.Join(dir, "result", "result.json"), &got)
	r := got.Remedies
	if r == nil || len(r.ClippedCells) == 0 || got.Settings.NegativeCells != "clip" {
		t.Fatalf("no clipped cells recorded: %+v, settings %+v", r, got.Settings)
	}
	var sum float64
	for _, c := range r.ClippedCells {
		if !(c.Value < 0) {
			t.Errorf("clipped cell %+v is not negative", c)
		}
		sum += c.Value
	}
	if math.Abs(sum-r.ClippedWeight) > 1e-12*math.Abs(sum) {
		t.Errorf("recorded weight removed %v, sum of the clipped cells %v", r.ClippedWeight, sum)
	}
	if want := fmt.Sprintf("clipped %d negative migration cells to zero", len(r.ClippedCells)); !strings.Contains(stderr, want) {
		t.Errorf("stderr %q, want %q", stderr, want)
	}
}

// readJSON decodes the JSON file at path into v.
func readJSON(t *testing.T, path string, v any) {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, v); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
}

// A full disk during the demo is one line, prefixed, exit 5, and leaves
// nothing behind (a 200 KB tmpfs holds the inputs of no demo; mounting
// it needs root, so the test is skipped elsewhere).
func TestDemoFullDisk(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "disk")
	os.Mkdir(dir, 0o755)
	if out, err := exec.Command("mount", "-t", "tmpfs", "-o", "size=200k", "tmpfs", dir).CombinedOutput(); err != nil {
		t.Skipf("cannot mount a small tmpfs here (%v: %s)", err, out)
	}
	t.Cleanup(func() { exec.Command("umount", "-l", dir).Run() }) // lazily: a writer of the failed run may hold a file open
	out := filepath.Join(dir, "demo")
	code, stdout, stderr := runCLI(t, context.Background(), "demo", "--out", out, "--events", "20000", "--no-report", "-q")
	checkRefusal(t, "demo on a full disk", code, stdout, stderr, exitIO, "no space left on device", out)
	if entries, _ := os.ReadDir(dir); len(entries) != 0 {
		t.Errorf("left on the full disk: %v", entries)
	}
}

// runBounded runs the command in-process like runCLI and checks that the
// run allocates less than 200 MB in all (runtime.MemStats.TotalAlloc, an
// upper bound of its peak heap): the bound the hostile inputs of the
// tables below must stay within.
func runBounded(t *testing.T, name string, args ...string) (int, string, string) {
	t.Helper()
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	code, stdout, stderr := runCLI(t, context.Background(), args...)
	runtime.ReadMemStats(&after)
	if a := after.TotalAlloc - before.TotalAlloc; a > 200<<20 {
		t.Errorf("%s: %d MB allocated", name, a>>20)
	}
	return code, stdout, stderr
}

// Damaged event files through the command (the demo's ROOT simulation,
// zlib-compressed, and its Parquet data): 64 bytes overwritten in the
// middle, or a length in the ROOT header made larger than the file, are
// refused in one line naming the file (exit 3), within the memory bound,
// with no output left behind; with --force over an earlier output, that
// output is left byte-identical (common practice: zlib streams carry an
// Adler-32 sum, Parquet pages a CRC-32; a ROOT header's records lie
// inside the file).
func TestDamagedEventFiles(t *testing.T) {
	base := t.TempDir()
	demo := filepath.Join(base, "demo")
	if code, _, stderr := runCLI(t, context.Background(), "demo", "--out", demo, "--events", "20000", "--no-report", "-q"); code != 0 {
		t.Fatalf("demo: exit %d, %s", code, stderr)
	}
	analysisFile := filepath.Join(demo, "analysis.yaml")
	resp, result := filepath.Join(base, "resp"), filepath.Join(demo, "result")
	if code, _, stderr := runCLI(t, context.Background(), "response", analysisFile, "--out", resp, "-q"); code != 0 {
		t.Fatalf("response: exit %d, %s", code, stderr)
	}
	middle := func(b []byte) {
		for i := len(b) / 2; i < len(b)/2+64; i++ {
			b[i] ^= 0x5a
		}
	}
	freeLength := func(b []byte) { binary.BigEndian.PutUint32(b[20:], 0x7ffffff0) }
	for _, c := range []struct {
		name, file string
		damage     func([]byte)
		cmd        []string
		out        string
		force      bool
		want       string
	}{
		{"64 bytes of the ROOT simulation", "simulation.root", middle, []string{"response", analysisFile, "--out", filepath.Join(base, "new")}, filepath.Join(base, "new"), false, "damaged"},
		{"64 bytes of the ROOT simulation, --force", "simulation.root", middle, []string{"response", analysisFile, "--out", resp, "--force"}, resp, true, "damaged"},
		{"the free-segment length of the ROOT simulation", "simulation.root", freeLength, []string{"response", analysisFile, "--out", filepath.Join(base, "new")}, filepath.Join(base, "new"), false, "damaged ROOT file: the free-segment record of 2147483632 bytes"},
		{"the free-segment length of the ROOT simulation, --force", "simulation.root", freeLength, []string{"unfold", analysisFile, "--no-report", "--force"}, result, true, "damaged ROOT file: the free-segment record of 2147483632 bytes"},
		{"64 bytes of the Parquet data, --force", "data.parquet", middle, []string{"unfold", analysisFile, "--no-report", "--force"}, result, true, "data.parquet"},
	} {
		p := filepath.Join(demo, c.file)
		orig, err := os.ReadFile(p)
		if err != nil {
			t.Fatal(err)
		}
		var before map[string]string
		if c.force {
			before = treeSums(t, c.out)
		}
		d := append([]byte(nil), orig...)
		c.damage(d)
		os.WriteFile(p, d, 0o644)
		code, stdout, stderr := runBounded(t, c.name, c.cmd...)
		if c.force {
			checkRefusal(t, c.name, code, stdout, stderr, exitInput, c.want, "")
			if after := treeSums(t, c.out); !stdmaps.Equal(before, after) {
				t.Errorf("%s: the earlier output %s changed", c.name, c.out)
			}
		} else {
			checkRefusal(t, c.name, code, stdout, stderr, exitInput, c.want, c.out)
		}
		if !strings.Contains(stderr, p) {
			t.Errorf("%s: the message does not name %s: %q", c.name, p, stderr)
		}
		os.WriteFile(p, orig, 0o644)
	}
	if entries, _ := os.ReadDir(base); len(entries) != 2 {
		t.Errorf("beside the demo and the response: %v", entries)
	}
}

// Plain tables: a negative response cell is refused by default, naming
// the remedy; clipped, the result equals the same tables with that cell
// removed by hand (the clip sets it to zero: common practice for
// negative-weight cells), and the weight removed is the cell's value.
func TestNegativeCellsThroughTables(t *testing.T) {
	dir := t.TempDir()
	write := func(name, content string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(content), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	resp := write("r.csv", "reco,truth,value\n0,0,10\n1,0,4\n2,0,-1.5\n0,1,2\n1,1,8\n2,1,3\n")
	respHand := write("rh.csv", "reco,truth,value\n0,0,10\n1,0,4\n0,1,2\n1,1,8\n2,1,3\n")
	gen := write("g.csv", "truth,value\n0,20\n1,20\n")
	data := write("n.csv", "reco,value\n0,12\n1,12\n2,3\n")
	args := func(a, out string, more ...string) []string {
		return append([]string{"unfold", "--response", a, "--generated", gen, "--data", data, "--iterations", "3", "--out", filepath.Join(dir, out)}, more...)
	}
	ctx := context.Background()
	code, stdout, stderr := runBounded(t, "negative cell in a table", args(resp, "refused")...)
	checkRefusal(t, "negative cell in a table", code, stdout, stderr, exitInput, "negative migration cells", filepath.Join(dir, "refused"))
	if !strings.Contains(stderr, "--negative-cells clip") {
		t.Errorf("the refusal does not name the remedy: %q", stderr)
	}
	code, _, stderr = runCLI(t, ctx, args(resp, "clipped", "--negative-cells", "clip")...)
	if code != 0 {
		t.Fatalf("with the remedy: exit %d, %s", code, stderr)
	}
	if !strings.Contains(stderr, "clipped 1 negative migration cells to zero") {
		t.Errorf("stderr %q does not report the clipped cell", stderr)
	}
	if code, _, stderr := runCLI(t, ctx, args(respHand, "by-hand")...); code != 0 {
		t.Fatalf("the table edited by hand: exit %d, %s", code, stderr)
	}
	var got, want remediedResult
	readJSON(t, filepath.Join(dir, "clipped", "result.json"), &got)
	readJSON(t, filepath.Join(dir, "by-hand", "result.json"), &want)
	if !slices.Equal(got.Estimate, want.Estimate) || !slices.Equal(got.Uncertainty, want.Uncertainty) {
		t.Errorf("clipped estimate %v ± %v, by hand %v ± %v", got.Estimate, got.Uncertainty, want.Estimate, want.Uncertainty)
	}
	if got.Remedies == nil || len(got.Remedies.ClippedCells) != 1 || got.Remedies.ClippedWeight != -1.5 {
		t.Errorf("recorded remedies %+v, want one cell of -1.5", got.Remedies)
	}
}
