package response

import (
	"crypto/sha256"
	"fmt"
	"os"
	"path/filepath"
	"testing"
)

// FuzzLoad loads a bundle of arbitrary response.json and migrations.dsm
// bytes, with the manifest written for them so that the fuzzer reaches
// the decoders rather than stopping at the checksums (seed:
// testdata/bundle, written by Save): a response whose sizes agree, or an
// error, never a panic.
func FuzzLoad(f *testing.F) {
	js, err := os.ReadFile("testdata/bundle/" + bundleJSON)
	if err != nil {
		f.Fatal(err)
	}
	dsm, err := os.ReadFile("testdata/bundle/" + bundleMatrix)
	if err != nil {
		f.Fatal(err)
	}
	f.Add(js, dsm)
	dir := f.TempDir()
	f.Fuzz(func(t *testing.T, js, dsm []byte) {
		manifest := fmt.Sprintf("%x  %s\n%x  %s\n", sha256.Sum256(js), bundleJSON, sha256.Sum256(dsm), bundleMatrix)
		for name, b := range map[string][]byte{bundleJSON: js, bundleMatrix: dsm, bundleManifest: []byte(manifest)} {
			if err := os.WriteFile(filepath.Join(dir, name), b, 0o644); err != nil {
				t.Fatal(err)
			}
		}
		r, _, err := Load(dir)
		if err != nil {
			return
		}
		if rows, cols := r.Migrations.Dims(); rows != r.RecoBins() || cols != r.TruthBins() {
			t.Fatalf("a %d×%d matrix for %d reco and %d truth bins", rows, cols, r.RecoBins(), r.TruthBins())
		}
	})
}
