package response

import (
	"bytes"
	"crypto/sha256"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strings"

	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold/inputs"
	"github.com/desmear/desmear/unfold/internal/atomicfile"
)

// A part is a folder holding the partial responses of some shards of a
// simulation, to be merged with the other parts into a response bundle:
//
//	part.json         format, the plan (PartInfo: the analysis, the
//	                  binnings, every shard of the simulation) and, per
//	                  shard of the part, its histograms and counts
//	shard-NNNNNN.dsm  the migration matrix of shard NNNNNN (its number
//	                  in the plan), in the sparse package's file format
//	manifest.sha256   one line "SHA-256  NAME" per file above
//
// It is written atomically, like a bundle.
const (
	PartFormat   = "desmear-response-part"
	PartVersion  = 1
	partJSON     = "part.json"
	partManifest = "manifest.sha256"
)

// PartInfo describes the plan a part belongs to.
type PartInfo struct {
	// Analysis is the SHA-256 of the analysis file; TruthScheme and
	// RecoScheme the Fingerprint of each binning.
	Analysis    string `json:"analysis"`
	TruthScheme string `json:"truth_scheme"`
	RecoScheme  string `json:"reco_scheme"`
	Program     string `json:"program"`
	// Inputs are the simulation files, in order.
	Inputs []inputs.File `json:"inputs"`
	// ShardEvents is the number of events of a shard and Shards every
	// shard of the simulation, in merge order.
	ShardEvents int64   `json:"shard_events"`
	Shards      []Shard `json:"shards"`
	// Index and Count: this is part Index of Count.
	Index int `json:"index"`
	Count int `json:"count"`
}

// Part is the partial responses of some shards of a plan.
type Part struct {
	Info PartInfo
	// Numbers are the numbers (in Info.Shards) of the shards of the
	// part, and Partials their partial responses.
	Numbers  []int
	Partials []*Built
}

// PartShards returns the numbers of the shards of part index of count
// among n shards: the consecutive block [index·n/count,
// (index+1)·n/count), empty when there are more parts than shards.
func PartShards(index, count, n int) (lo, hi int) {
	if count < 1 || index < 0 || index >= count {
		panic("response: part index out of range")
	}
	return index * n / count, (index + 1) * n / count
}

type partShard struct {
	Number         int       `json:"number"`
	Generated      []float64 `json:"generated"`
	GeneratedSumW2 []float64 `json:"generated_sumw2"`
	Fakes          []float64 `json:"fakes"`
	FakesSumW2     []float64 `json:"fakes_sumw2"`
	Diagonal       []float64 `json:"diagonal,omitempty"`
	RecoInTruth    []float64 `json:"reco_in_truth,omitempty"`
	Summary        Summary   `json:"summary"`
}

type partDoc struct {
	Format  string      `json:"format"`
	Version int         `json:"format_version"`
	Info    PartInfo    `json:"info"`
	Shards  []partShard `json:"part_shards"`
}

func shardFile(n int) string { return fmt.Sprintf("shard-%06d.dsm", n) }

// CheckPart reports whether a part could be written at dir (see
// CheckBundle).
func CheckPart(dir string, replace bool) error {
	if err := atomicfile.Check(dir, partJSON, replace); err != nil {
		return fmt.Errorf("response part: %w", err)
	}
	return nil
}

// Save writes the part at dir, atomically; an existing dir is replaced
// only with replace, and only when it is empty or an earlier part.
func (p *Part) Save(dir string, replace bool) error {
	doc := partDoc{Format: PartFormat, Version: PartVersion, Info: p.Info, Shards: []partShard{}}
	for i, r := range p.Partials {
		doc.Shards = append(doc.Shards, partShard{Number: p.Numbers[i], Generated: r.Generated, GeneratedSumW2: r.GeneratedSumW2,
			Fakes: r.Fakes, FakesSumW2: r.FakesSumW2, Diagonal: r.Diagonal, RecoInTruth: r.RecoInTruth, Summary: r.Summary})
	}
	b, err := json.MarshalIndent(&doc, "", " ")
	if err != nil {
		return err
	}
	f, err := atomicfile.New(dir, partJSON, replace)
	if err != nil {
		return fmt.Errorf("response part: %w", err)
	}
	defer f.Abort()
	if err := f.WriteFile(partJSON, b); err != nil {
		return err
	}
	var manifest strings.Builder
	fmt.Fprintf(&manifest, "%x  %s\n", sha256.Sum256(b), partJSON)
	for i, r := range p.Partials {
		name := shardFile(p.Numbers[i])
		w, err := f.Create(name)
		if err != nil {
			return err
		}
		h := sha256.New()
		if _, err := r.Migrations.WriteTo(io.MultiWriter(w, h)); err != nil {
			return fmt.Errorf("%s: %w", filepath.Join(dir, name), err)
		}
		fmt.Fprintf(&manifest, "%x  %s\n", h.Sum(nil), name)
	}
	if err := f.WriteFile(partManifest, []byte(manifest.String())); err != nil {
		return err
	}
	if err := f.Commit(); err != nil {
		return fmt.Errorf("response part: %w", err)
	}
	return nil
}

// LoadPart reads the part at dir, checking its files against its
// manifest.
func LoadPart(dir string) (*Part, error) {
	jpath := filepath.Join(dir, partJSON)
	b, err := os.ReadFile(jpath)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return nil, fmt.Errorf("%s is not a response part (no %s in it)", dir, partJSON)
		}
		return nil, err
	}
	var doc partDoc
	if err := json.Unmarshal(b, &doc); err != nil {
		return nil, fmt.Errorf("%s: %v", jpath, err)
	}
	if doc.Format != PartFormat || doc.Version != PartVersion {
		return nil, fmt.Errorf("%s: format %q version %d, want %q version %d", jpath, doc.Format, doc.Version, PartFormat, PartVersion)
	}
	mpath := filepath.Join(dir, partManifest)
	text, err := os.ReadFile(mpath)
	if err != nil {
		return nil, fmt.Errorf("%s: %w; build the part again", mpath, err)
	}
	want := map[string]string{}
	for i, line := range strings.Split(strings.TrimSuffix(string(text), "\n"), "\n") {
		sum, name, ok := strings.Cut(line, "  ")
		if !ok || len(sum) != 2*sha256.Size {
			return nil, fmt.Errorf("%s:%d: not a line \"SHA-256  NAME\"", mpath, i+1)
		}
		want[name] = sum
	}
	if want[partJSON] != fmt.Sprintf("%x", sha256.Sum256(b)) {
		return nil, fmt.Errorf("%s: changed since the part was written (its SHA-256 differs from %s); build the part again", jpath, partManifest)
	}
	info := doc.Info
	nt, nr := -1, -1
	p := &Part{Info: info}
	for k, s := range doc.Shards {
		if s.Number < 0 || s.Number >= len(info.Shards) {
			return nil, fmt.Errorf("%s: part shard %d is shard %d of a plan of %d", jpath, k, s.Number, len(info.Shards))
		}
		name := shardFile(s.Number)
		path := filepath.Join(dir, name)
		data, err := os.ReadFile(path)
		if err != nil {
			return nil, err
		}
		if want[name] != fmt.Sprintf("%x", sha256.Sum256(data)) {
			return nil, fmt.Errorf("%s: changed since the part was written (its SHA-256 differs from %s, or it is not listed); build the part again", path, partManifest)
		}
		m, err := sparse.Read(bytes.NewReader(data))
		if err != nil {
			return nil, fmt.Errorf("%s: %w", path, err)
		}
		rows, cols := m.Dims()
		if nt < 0 {
			nt, nr = cols, rows
		}
		bad := cols != nt || rows != nr || len(s.Generated) != nt || len(s.GeneratedSumW2) != nt || len(s.Fakes) != nr || len(s.FakesSumW2) != nr ||
			(s.Diagonal != nil && len(s.Diagonal) != nt) || (s.RecoInTruth != nil && len(s.RecoInTruth) != nt) || (s.Diagonal == nil) != (s.RecoInTruth == nil)
		if bad {
			return nil, fmt.Errorf("%s: shard %d: sizes do not match a %d×%d migration matrix", jpath, s.Number, rows, cols)
		}
		p.Numbers = append(p.Numbers, s.Number)
		p.Partials = append(p.Partials, &Built{Migrations: m, Generated: s.Generated, GeneratedSumW2: s.GeneratedSumW2,
			Fakes: s.Fakes, FakesSumW2: s.FakesSumW2, Diagonal: s.Diagonal, RecoInTruth: s.RecoInTruth, Summary: s.Summary})
	}
	return p, nil
}

// maxListed is the largest number of shards a merge error lists one by
// one.
const maxListed = 20

// MergeParts merges the parts of one plan, named by names (their
// folders, for messages), into the response of the whole simulation and
// its provenance: the partials in shard order, as one process building
// every shard gives them. It refuses parts of different plans (another
// analysis file, other binnings, other simulation files or shards), and
// parts that do not cover every shard of the plan exactly once, listing
// the shards missing and those given more than once.
func MergeParts(parts []*Part, names []string) (*Built, *BundleInfo, error) {
	if len(parts) == 0 {
		return nil, nil, errors.New("no response part to merge")
	}
	if len(names) != len(parts) {
		panic("response: MergeParts needs one name per part")
	}
	ref := &parts[0].Info
	for q, p := range parts[1:] {
		in := &p.Info
		var differ []string
		if in.Analysis != ref.Analysis {
			differ = append(differ, "the analysis file")
		}
		if in.TruthScheme != ref.TruthScheme {
			differ = append(differ, "the truth binning")
		}
		if in.RecoScheme != ref.RecoScheme {
			differ = append(differ, "the reco binning")
		}
		if !sameFiles(in.Inputs, ref.Inputs) {
			differ = append(differ, "the simulation files")
		}
		if in.ShardEvents != ref.ShardEvents || !sameShards(in.Shards, ref.Shards) {
			differ = append(differ, "the shards")
		}
		if len(differ) > 0 {
			return nil, nil, fmt.Errorf("%s does not belong with %s: %s differ; build every part from the same analysis file and simulation", names[q+1], names[0], strings.Join(differ, ", "))
		}
	}
	n := len(ref.Shards)
	from := make([][]int, n) // parts holding each shard
	at := make([]*Built, n)
	for q, p := range parts {
		for i, s := range p.Numbers {
			from[s] = append(from[s], q)
			at[s] = p.Partials[i]
		}
	}
	var missing, dup []string
	for s := range n {
		switch len(from[s]) {
		case 0:
			missing = append(missing, fmt.Sprintf("%d (%v)", s, ref.Shards[s]))
		case 1:
		default:
			var in []string
			for _, q := range from[s] {
				in = append(in, names[q])
			}
			dup = append(dup, fmt.Sprintf("%d (%v) in %s", s, ref.Shards[s], strings.Join(in, " and ")))
		}
	}
	if len(missing) > 0 || len(dup) > 0 {
		var msg []string
		if len(missing) > 0 {
			msg = append(msg, fmt.Sprintf("%d of the %d shards missing: %s", len(missing), n, listed(missing)))
		}
		if len(dup) > 0 {
			msg = append(msg, fmt.Sprintf("%d shards given more than once: %s", len(dup), listed(dup)))
		}
		return nil, nil, fmt.Errorf("the parts do not cover every shard exactly once: %s", strings.Join(msg, "; "))
	}
	nr, nt := at[0].Migrations.Dims()
	g := NewMerger(nt, nr)
	info := &BundleInfo{TruthScheme: ref.TruthScheme, RecoScheme: ref.RecoScheme, Inputs: ref.Inputs, Program: ref.Program,
		ShardEvents: ref.ShardEvents, Shards: ref.Shards}
	for s := range n {
		if err := g.Add(at[s]); err != nil {
			return nil, nil, fmt.Errorf("%s: shard %d: %w", names[from[s][0]], s, err)
		}
		sh := ref.Shards[s]
		for len(info.Samples) <= sh.Sample {
			info.Samples = append(info.Samples, SampleSummary{File: sh.File})
		}
		info.Samples[sh.Sample].Summary.add(&at[s].Summary)
		at[s] = nil
	}
	r, err := g.Built()
	if err != nil {
		return nil, nil, err
	}
	return r, info, nil
}

func listed(items []string) string {
	if len(items) > maxListed {
		return strings.Join(items[:maxListed], ", ") + fmt.Sprintf(", and %d more", len(items)-maxListed)
	}
	return strings.Join(items, ", ")
}

func sameFiles(a, b []inputs.File) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i].SHA256 != b[i].SHA256 {
			return false
		}
	}
	return true
}

func sameShards(a, b []Shard) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		x, y := a[i], b[i]
		if x.Sample != y.Sample || x.SHA256 != y.SHA256 || x.Lo != y.Lo || x.Hi != y.Hi {
			return false
		}
	}
	return true
}
