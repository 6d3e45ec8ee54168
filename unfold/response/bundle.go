package response

import (
	"bufio"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strings"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold/inputs"
	"github.com/desmear/desmear/unfold/internal/atomicfile"
)

// A response bundle is a folder holding a built response:
//
//	response.json    format, sizes, the generated and fakes vectors with
//	                 their sums of squared weights, the purity histograms,
//	                 the summary and provenance (BundleInfo)
//	migrations.dsm   the migration matrix with its sums of squared
//	                 weights, in the sparse package's checksummed file
//	                 format (sparse.Matrix.WriteTo, sparse.Load)
//	manifest.sha256  one line "SHA-256  NAME" for each of the two files
//	                 above, checked when the bundle is loaded
//
// It is written atomically: into a hidden temporary sibling folder that
// is renamed into place. Version 3 records the shards the response was
// merged from (BundleInfo.Shards); version 2 bundles, identical but for
// that list, are still read. Version 1 bundles (without a manifest) are
// refused: they have to be built again.
const (
	BundleFormat   = "desmear-response"
	BundleVersion  = 3
	bundleJSON     = "response.json"
	bundleMatrix   = "migrations.dsm"
	bundleManifest = "manifest.sha256"
)

// BundleFiles returns the names of the data files of a response bundle
// (without the manifest, which only holds their sums).
func BundleFiles() []string { return []string{bundleJSON, bundleMatrix} }

// BundleInfo is the provenance stored with a response bundle.
type BundleInfo struct {
	// TruthScheme and RecoScheme identify the binning schemes the
	// response was built for (Fingerprint of each scheme);
	// the loader compares them with the schemes in use.
	TruthScheme string `json:"truth_scheme"`
	RecoScheme  string `json:"reco_scheme"`
	// Inputs are the files the response was built from.
	Inputs []inputs.File `json:"inputs"`
	// Program is the program version that built it.
	Program string `json:"program"`
	// Samples holds the counts of each simulated sample, in order.
	Samples []SampleSummary `json:"samples,omitempty"`
	// ShardEvents is the number of events of a shard, and Shards the
	// shards the response was merged from, in merge order (empty in
	// bundles of format version 2).
	ShardEvents int64   `json:"shard_events,omitempty"`
	Shards      []Shard `json:"shards,omitempty"`
}

// Fingerprint identifies a binning scheme by the SHA-256 of its bin
// labels and flow flags, the value of BundleInfo.TruthScheme and
// RecoScheme, so that a saved response is only used with the schemes it
// was built for.
func Fingerprint(s *binning.Scheme) string {
	h := sha256.New()
	w := bufio.NewWriterSize(h, 64<<10)
	s.EachLabel(func(g int, label []byte) {
		w.Write(label)
		// The flow bins are the global bins from InRange on.
		if g >= s.InRange() {
			w.WriteString("|true\n")
		} else {
			w.WriteString("|false\n")
		}
	})
	w.Flush() // a hash's Write never fails
	return hex.EncodeToString(h.Sum(nil))
}

// SampleSummary is the Summary of one sample (without cell lists).
type SampleSummary struct {
	File    string  `json:"file"`
	Summary Summary `json:"summary"`
}

type bundleDoc struct {
	Format         string     `json:"format"`
	Version        int        `json:"format_version"`
	Info           BundleInfo `json:"info"`
	TruthBins      int        `json:"truth_bins"`
	RecoBins       int        `json:"reco_bins"`
	Generated      []float64  `json:"generated"`
	GeneratedSumW2 []float64  `json:"generated_sumw2"`
	Fakes          []float64  `json:"fakes"`
	FakesSumW2     []float64  `json:"fakes_sumw2"`
	Diagonal       []float64  `json:"diagonal,omitempty"`
	RecoInTruth    []float64  `json:"reco_in_truth,omitempty"`
	Summary        Summary    `json:"summary"`
}

// CheckBundle reports whether a response bundle could be written at dir:
// nil when nothing exists there, or when replace is set and dir is empty
// or an earlier bundle. Otherwise the error wraps result.ErrExists or
// result.ErrNotResult (see Save).
func CheckBundle(dir string, replace bool) error {
	if err := atomicfile.Check(dir, bundleJSON, replace); err != nil {
		return fmt.Errorf("response bundle: %w", err)
	}
	return nil
}

// Save writes r and info as a response bundle at dir, atomically. An
// existing dir is refused (the error wraps result.ErrExists) unless
// replace is set and it is empty or an earlier bundle (it holds a
// response.json); any other folder is left alone (the error wraps
// result.ErrNotResult, the module's error for a folder that is not an
// earlier one of the kind being written).
func (r *Built) Save(dir string, info BundleInfo, replace bool) (err error) {
	doc := bundleDoc{Format: BundleFormat, Version: BundleVersion, Info: info,
		TruthBins: r.TruthBins(), RecoBins: r.RecoBins(),
		Generated: r.Generated, GeneratedSumW2: r.GeneratedSumW2, Fakes: r.Fakes, FakesSumW2: r.FakesSumW2,
		Diagonal: r.Diagonal, RecoInTruth: r.RecoInTruth, Summary: r.Summary}
	b, err := json.MarshalIndent(&doc, "", " ")
	if err != nil {
		return err
	}
	f, err := atomicfile.New(dir, bundleJSON, replace)
	if err != nil {
		return fmt.Errorf("response bundle: %w", err)
	}
	defer f.Abort()
	if err := f.WriteFile(bundleJSON, b); err != nil {
		return err
	}
	w, err := f.Create(bundleMatrix)
	if err != nil {
		return err
	}
	mh := sha256.New()
	if _, err := r.Migrations.WriteTo(io.MultiWriter(w, mh)); err != nil {
		return fmt.Errorf("%s: %w", filepath.Join(dir, bundleMatrix), err)
	}
	js := sha256.Sum256(b)
	manifest := fmt.Sprintf("%x  %s\n%x  %s\n", js, bundleJSON, mh.Sum(nil), bundleMatrix)
	if err := f.WriteFile(bundleManifest, []byte(manifest)); err != nil {
		return err
	}
	if err := f.Commit(); err != nil {
		return fmt.Errorf("response bundle: %w", err)
	}
	return nil
}

// Load reads the response bundle at dir.
func Load(dir string) (*Built, *BundleInfo, error) {
	return load(folder(dir), dir)
}

// bundleFiles reads the files of a bundle by name: from its folder
// (folder), or from memory in the fuzz target.
type bundleFiles interface {
	readFile(name string) ([]byte, error)
	open(name string) (io.ReadCloser, error)
	matrix(name string) (*sparse.Matrix, error)
}

// folder is the bundle in the folder it names.
type folder string

func (d folder) readFile(name string) ([]byte, error) {
	return os.ReadFile(filepath.Join(string(d), name))
}

func (d folder) open(name string) (io.ReadCloser, error) {
	return os.Open(filepath.Join(string(d), name))
}

func (d folder) matrix(name string) (*sparse.Matrix, error) {
	return sparse.Load(filepath.Join(string(d), name))
}

// load reads the bundle of files, called dir in messages.
func load(files bundleFiles, dir string) (*Built, *BundleInfo, error) {
	b, err := files.readFile(bundleJSON)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return nil, nil, fmt.Errorf("%s is not a response bundle (no %s in it)", dir, bundleJSON)
		}
		return nil, nil, err
	}
	var doc bundleDoc
	if err := json.Unmarshal(b, &doc); err != nil {
		return nil, nil, fmt.Errorf("%s: %v", filepath.Join(dir, bundleJSON), err)
	}
	if doc.Format == BundleFormat && doc.Version == 1 {
		return nil, nil, fmt.Errorf("%s: a bundle of format version 1, which carries no checksums and is no longer read; build the response again", filepath.Join(dir, bundleJSON))
	}
	if doc.Format != BundleFormat || doc.Version != BundleVersion && doc.Version != 2 {
		return nil, nil, fmt.Errorf("%s: format %q version %d, want %q version %d", filepath.Join(dir, bundleJSON), doc.Format, doc.Version, BundleFormat, BundleVersion)
	}
	if err := checkManifest(files, dir, b); err != nil {
		return nil, nil, err
	}
	nt, nr := doc.TruthBins, doc.RecoBins
	bad := len(doc.Generated) != nt || len(doc.GeneratedSumW2) != nt || len(doc.Fakes) != nr || len(doc.FakesSumW2) != nr ||
		(doc.Diagonal != nil && len(doc.Diagonal) != nt) || (doc.RecoInTruth != nil && len(doc.RecoInTruth) != nt) ||
		(doc.Diagonal == nil) != (doc.RecoInTruth == nil)
	if bad {
		return nil, nil, fmt.Errorf("%s: vector lengths do not match %d truth and %d reco bins", filepath.Join(dir, bundleJSON), nt, nr)
	}
	// Non-finite numbers: JSON cannot hold them (the decoder refuses
	// 1e400) and sparse.Load refuses them in the matrix.
	m, err := files.matrix(bundleMatrix)
	if err != nil {
		return nil, nil, err
	}
	if rows, cols := m.Dims(); rows != nr || cols != nt {
		return nil, nil, fmt.Errorf("%s: a %d×%d matrix, want %d×%d", filepath.Join(dir, bundleMatrix), rows, cols, nr, nt)
	}
	r := &Built{Migrations: m, Generated: doc.Generated, GeneratedSumW2: doc.GeneratedSumW2,
		Fakes: doc.Fakes, FakesSumW2: doc.FakesSumW2, Diagonal: doc.Diagonal, RecoInTruth: doc.RecoInTruth, Summary: doc.Summary}
	return r, &doc.Info, nil
}

// checkManifest compares the SHA-256 sums in the manifest of the bundle
// of files, called dir in messages, with its files (js is the content of
// response.json, already read). Every file of the bundle must be listed.
func checkManifest(files bundleFiles, dir string, js []byte) error {
	mpath := filepath.Join(dir, bundleManifest)
	text, err := files.readFile(bundleManifest)
	if errors.Is(err, fs.ErrNotExist) {
		return fmt.Errorf("%s: missing; the bundle's files cannot be checked, build the response again", mpath)
	}
	if err != nil {
		return err
	}
	want := map[string]string{}
	for i, line := range strings.Split(strings.TrimSuffix(string(text), "\n"), "\n") {
		sum, name, ok := strings.Cut(line, "  ")
		if !ok || len(sum) != 2*sha256.Size || (name != bundleJSON && name != bundleMatrix) || want[name] != "" {
			return fmt.Errorf("%s:%d: not a line \"SHA-256  %s\" or \"SHA-256  %s\"", mpath, i+1, bundleJSON, bundleMatrix)
		}
		want[name] = sum
	}
	got := map[string]string{bundleJSON: fmt.Sprintf("%x", sha256.Sum256(js))}
	f, err := files.open(bundleMatrix)
	if err != nil {
		return err
	}
	defer f.Close()
	h := sha256.New()
	if _, err := io.Copy(h, f); err != nil {
		return fmt.Errorf("%s: %w", filepath.Join(dir, bundleMatrix), err)
	}
	got[bundleMatrix] = fmt.Sprintf("%x", h.Sum(nil))
	for _, name := range []string{bundleJSON, bundleMatrix} {
		switch {
		case want[name] == "":
			return fmt.Errorf("%s: %s is not listed; build the response again", mpath, name)
		case want[name] != got[name]:
			return fmt.Errorf("%s: changed since the bundle was written (its SHA-256 differs from %s); build the response again", filepath.Join(dir, name), bundleManifest)
		}
	}
	return nil
}
