package response

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold/internal/atomicfile"
)

func TestBundleRoundTrip(t *testing.T) {
	b := NewBuilder(handTruth, handReco)
	if _, err := b.Add(context.Background(), handSimulation(4), nil); err != nil {
		t.Fatal(err)
	}
	r, err := b.Build()
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "resp")
	info := BundleInfo{TruthScheme: "t", RecoScheme: "r", Program: "test", ShardEvents: 8,
		Shards: []Shard{{Sample: 0, File: "a.csv", SHA256: "00ff", Lo: 0, Hi: 8}, {Sample: 0, File: "a.csv", SHA256: "00ff", Lo: 8, Hi: 11}}}
	if err := r.Save(dir, info, false); err != nil {
		t.Fatal(err)
	}
	if err := r.Save(dir, info, false); err == nil {
		t.Fatal("an existing bundle was overwritten without replace")
	}
	if err := r.Save(dir, info, true); err != nil {
		t.Fatal(err)
	}
	got, gi, err := Load(dir)
	if err != nil {
		t.Fatal(err)
	}
	if gi.TruthScheme != "t" || gi.RecoScheme != "r" || gi.Program != "test" || gi.ShardEvents != 8 || !slices.Equal(gi.Shards, info.Shards) {
		t.Errorf("info %+v", gi)
	}
	m, g := r.Migrations, got.Migrations
	if !slices.Equal(m.ColPtr(), g.ColPtr()) || !slices.Equal(m.RowIdx(), g.RowIdx()) || !slices.Equal(m.Values(), g.Values()) || !slices.Equal(m.SumW2(), g.SumW2()) {
		t.Error("matrix differs after the round trip")
	}
	if !slices.Equal(r.Generated, got.Generated) || !slices.Equal(r.FakesSumW2, got.FakesSumW2) || !slices.Equal(r.RecoInTruth, got.RecoInTruth) {
		t.Error("vectors differ after the round trip")
	}
	if got.Summary.Fakes != r.Summary.Fakes || got.Summary.NegativeCellCount != 1 {
		t.Errorf("summary %+v", got.Summary)
	}
	// A non-finite cell in the matrix file, with a matching manifest, is
	// refused naming the file.
	r.Migrations.Values()[0] = math.Inf(1)
	nan := filepath.Join(t.TempDir(), "nan")
	if err := r.Save(nan, info, false); err != nil {
		t.Fatal(err)
	}
	if _, _, err := Load(nan); err == nil || !strings.Contains(err.Error(), "migrations.dsm: invalid matrix file: sparse: non-finite value +Inf at (0,0)") {
		t.Errorf("infinite cell: got %v", err)
	}
	// A damaged matrix file is an error, not a panic.
	p := filepath.Join(dir, bundleMatrix)
	data, _ := os.ReadFile(p)
	data[40] ^= 1
	os.WriteFile(p, data, 0o644)
	if _, _, err := Load(dir); err == nil {
		t.Errorf("damaged file: got %v", err)
	}
	os.WriteFile(p, data[:20], 0o644)
	if _, _, err := Load(dir); err == nil {
		t.Error("truncated file loaded")
	}
}

// Folders that are not bundles of this format are refused, with
// messages naming the file.
func TestBundleRefusals(t *testing.T) {
	b := NewBuilder(handTruth, handReco)
	if _, err := b.Add(context.Background(), handSimulation(4), nil); err != nil {
		t.Fatal(err)
	}
	r, err := b.Build()
	if err != nil {
		t.Fatal(err)
	}
	tmp := t.TempDir()

	// Replacing a folder that holds no bundle is refused, and it is left
	// as it was.
	plain := filepath.Join(tmp, "plain")
	os.Mkdir(plain, 0o755)
	os.WriteFile(filepath.Join(plain, "notes.txt"), []byte("keep"), 0o644)
	if err := r.Save(plain, BundleInfo{}, true); !errors.Is(err, atomicfile.ErrNotOurs) || !strings.Contains(err.Error(), "without a response.json") {
		t.Errorf("replacing a plain folder: got %v", err)
	}
	if _, err := os.Stat(filepath.Join(plain, "notes.txt")); err != nil {
		t.Errorf("the plain folder was changed: %v", err)
	}
	if _, _, err := Load(plain); err == nil || !strings.Contains(err.Error(), "is not a response bundle (no response.json") {
		t.Errorf("loading a plain folder: got %v", err)
	}

	dir := filepath.Join(tmp, "resp")
	if err := r.Save(dir, BundleInfo{}, false); err != nil {
		t.Fatal(err)
	}
	good, err := os.ReadFile(filepath.Join(dir, bundleJSON))
	if err != nil {
		t.Fatal(err)
	}
	goodManifest, err := os.ReadFile(filepath.Join(dir, bundleManifest))
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		old, new, want string
		resum          bool // write a manifest matching the change
	}{
		{`"truth_bins": 4`, `"truth_bins": "4"`, "response.json: json: cannot unmarshal", true},
		{`"format_version": 3`, `"format_version": 4`, `format "desmear-response" version 4, want "desmear-response" version 3`, true},
		{`"format_version": 3`, `"format_version": 1`, `format version 1, which carries no checksums and is no longer read; build the response again`, true},
		{`"reco_bins": 3`, `"reco_bins": 4`, "vector lengths do not match 4 truth and 4 reco bins", true},
		{`"generated": [`, `"generated": [1e400,`, "response.json: json: cannot unmarshal number 1e400", true},
		// One changed digit is caught by the manifest, which names the file.
		{`"reco_bins": 3`, `"reco_bins": 4`, "response.json: changed since the bundle was written", false},
	} {
		bad := strings.Replace(string(good), c.old, c.new, 1)
		if bad == string(good) {
			t.Fatalf("%q not in response.json", c.old)
		}
		os.WriteFile(filepath.Join(dir, bundleJSON), []byte(bad), 0o644)
		manifest := goodManifest
		if c.resum {
			manifest = resummed(t, dir)
		}
		os.WriteFile(filepath.Join(dir, bundleManifest), manifest, 0o644)
		if _, _, err := Load(dir); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s → %s: got %v, want %q", c.old, c.new, err, c.want)
		}
	}
	// A bundle of format version 2 (no shard list) is still read.
	v2 := strings.Replace(string(good), `"format_version": 3`, `"format_version": 2`, 1)
	os.WriteFile(filepath.Join(dir, bundleJSON), []byte(v2), 0o644)
	os.WriteFile(filepath.Join(dir, bundleManifest), resummed(t, dir), 0o644)
	if r2, _, err := Load(dir); err != nil || r2.Migrations.NNZ() != r.Migrations.NNZ() {
		t.Errorf("a version 2 bundle: %v", err)
	}
	os.WriteFile(filepath.Join(dir, bundleJSON), good, 0o644)
	os.WriteFile(filepath.Join(dir, bundleManifest), goodManifest, 0o644)

	// A manifest that is missing, damaged or does not list a file.
	for _, c := range []struct{ manifest, want string }{
		{"", "manifest.sha256: missing"},
		{"nonsense\n", "manifest.sha256:1: not a line"},
		{strings.SplitAfter(string(goodManifest), "\n")[0], "manifest.sha256: migrations.dsm is not listed"},
	} {
		p := filepath.Join(dir, bundleManifest)
		os.Remove(p)
		if c.manifest != "" {
			os.WriteFile(p, []byte(c.manifest), 0o644)
		}
		if _, _, err := Load(dir); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("manifest %q: got %v, want %q", c.manifest, err, c.want)
		}
	}
	os.WriteFile(filepath.Join(dir, bundleManifest), goodManifest, 0o644)
	if _, _, err := Load(dir); err != nil {
		t.Fatalf("the restored bundle: %v", err)
	}

	// A matrix of other dimensions than the vectors.
	b2 := NewBuilder(handTruth, handTruth)
	if _, err := b2.Add(context.Background(), handSimulation(4), nil); err != nil {
		t.Fatal(err)
	}
	r2, err := b2.Build()
	if err != nil {
		t.Fatal(err)
	}
	other := filepath.Join(tmp, "other")
	if err := r2.Save(other, BundleInfo{}, false); err != nil {
		t.Fatal(err)
	}
	m, _ := os.ReadFile(filepath.Join(other, bundleMatrix))
	os.WriteFile(filepath.Join(dir, bundleMatrix), m, 0o644)
	if _, _, err := Load(dir); err == nil || !strings.Contains(err.Error(), "migrations.dsm: changed since the bundle was written") {
		t.Errorf("matrix replaced: got %v", err)
	}
	os.WriteFile(filepath.Join(dir, bundleManifest), resummed(t, dir), 0o644)
	if _, _, err := Load(dir); err == nil || !strings.Contains(err.Error(), "a 4×4 matrix, want 3×4") {
		t.Errorf("matrix of other size: got %v", err)
	}
}

// Fingerprint is the SHA-256 (FIPS 180-4) of the lines "label|flow" of
// the scheme's bins; schemes that differ in a bin label or a flow flag
// have different fingerprints.
func TestFingerprint(t *testing.T) {
	const one = "regions:\n  - name: a\n    axes: [{name: x, edges: [0, 1, 2]%s}]\n"
	s := mustScheme(t, fmt.Sprintf(one, ""))
	// Schemes with flow bins in two regions, so that every flow flag
	// of the lines is checked, besides the one without flows.
	const two = "regions:\n  - name: a\n    axes: [{name: x, edges: [0, 1, 2], underflow: true, overflow: true}, {name: y, edges: [0, 0.5, 1], overflow: true}]\n" +
		"  - name: b\n    axes: [{name: x, edges: [2, 3], underflow: true}, {name: y, edges: [0, 2]}]\n"
	for _, sc := range []*binning.Scheme{s, mustScheme(t, fmt.Sprintf(one, ", overflow: true")), mustScheme(t, two)} {
		var text strings.Builder
		for g := 0; g < sc.Len(); g++ {
			text.WriteString(sc.Label(g) + "|" + strconv.FormatBool(sc.Bin(g).Flow) + "\n")
		}
		sum := sha256.Sum256([]byte(text.String()))
		if got, want := Fingerprint(sc), hex.EncodeToString(sum[:]); got != want {
			t.Errorf("Fingerprint = %s, want %s (%d bins)", got, want, sc.Len())
		}
	}
	if Fingerprint(s) == Fingerprint(mustScheme(t, fmt.Sprintf(one, ", overflow: true"))) {
		t.Error("schemes with and without overflow have the same fingerprint")
	}
	if Fingerprint(s) != Fingerprint(mustScheme(t, fmt.Sprintf(one, ""))) {
		t.Error("the same scheme decoded twice has two fingerprints")
	}
}

// resummed returns a manifest with the SHA-256 (FIPS 180-4) of the
// bundle's files as they are now.
func resummed(t *testing.T, dir string) []byte {
	t.Helper()
	var out strings.Builder
	for _, name := range []string{bundleJSON, bundleMatrix} {
		b, err := os.ReadFile(filepath.Join(dir, name))
		if err != nil {
			t.Fatal(err)
		}
		fmt.Fprintf(&out, "%x  %s\n", sha256.Sum256(b), name)
	}
	return []byte(out.String())
}
