package response

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

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
	info := BundleInfo{TruthScheme: "t", RecoScheme: "r", Program: "test"}
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
	if gi.TruthScheme != "t" || gi.RecoScheme != "r" || gi.Program != "test" {
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
	for _, c := range []struct{ old, new, want string }{
		{`"truth_bins": 4`, `"truth_bins": "4"`, "response.json: json: cannot unmarshal"},
		{`"format_version": 1`, `"format_version": 2`, `format "desmear-response" version 2, want "desmear-response" version 1`},
		{`"reco_bins": 3`, `"reco_bins": 4`, "vector lengths do not match 4 truth and 4 reco bins"},
	} {
		bad := strings.Replace(string(good), c.old, c.new, 1)
		if bad == string(good) {
			t.Fatalf("%q not in response.json", c.old)
		}
		os.WriteFile(filepath.Join(dir, bundleJSON), []byte(bad), 0o644)
		if _, _, err := Load(dir); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s → %s: got %v, want %q", c.old, c.new, err, c.want)
		}
	}

	// A matrix of other dimensions than the vectors.
	os.WriteFile(filepath.Join(dir, bundleJSON), good, 0o644)
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
	var text strings.Builder
	for g := 0; g < s.Len(); g++ {
		text.WriteString(s.Label(g) + "|" + strconv.FormatBool(s.Bin(g).Flow) + "\n")
	}
	sum := sha256.Sum256([]byte(text.String()))
	if got, want := Fingerprint(s), hex.EncodeToString(sum[:]); got != want {
		t.Errorf("Fingerprint = %s, want %s", got, want)
	}
	if Fingerprint(s) == Fingerprint(mustScheme(t, fmt.Sprintf(one, ", overflow: true"))) {
		t.Error("schemes with and without overflow have the same fingerprint")
	}
	if Fingerprint(s) != Fingerprint(mustScheme(t, fmt.Sprintf(one, ""))) {
		t.Error("the same scheme decoded twice has two fingerprints")
	}
}
