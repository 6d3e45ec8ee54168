package response

import (
	"bytes"
	"crypto/sha256"
	"fmt"
	"io"
	"io/fs"
	"os"
	"testing"

	"github.com/desmear/desmear/sparse"
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
	f.Fuzz(func(t *testing.T, js, dsm []byte) {
		manifest := fmt.Sprintf("%x  %s\n%x  %s\n", sha256.Sum256(js), bundleJSON, sha256.Sum256(dsm), bundleMatrix)
		files := memFiles{bundleJSON: js, bundleMatrix: dsm, bundleManifest: []byte(manifest)}
		r, _, err := load(files, "bundle")
		if err != nil {
			return
		}
		if rows, cols := r.Migrations.Dims(); rows != r.RecoBins() || cols != r.TruthBins() {
			t.Fatalf("a %d×%d matrix for %d reco and %d truth bins", rows, cols, r.RecoBins(), r.TruthBins())
		}
	})
}

// memFiles is a bundle in memory, read by the code behind Load: the same
// decoding and checks, without files written per execution.
type memFiles map[string][]byte

func (m memFiles) readFile(name string) ([]byte, error) {
	if b, ok := m[name]; ok {
		return b, nil
	}
	return nil, &fs.PathError{Op: "open", Path: name, Err: fs.ErrNotExist}
}

func (m memFiles) open(name string) (io.ReadCloser, error) {
	b, err := m.readFile(name)
	return io.NopCloser(bytes.NewReader(b)), err
}

func (m memFiles) matrix(name string) (*sparse.Matrix, error) {
	b, err := m.readFile(name)
	if err != nil {
		return nil, err
	}
	return sparse.Read(bytes.NewReader(b))
}
