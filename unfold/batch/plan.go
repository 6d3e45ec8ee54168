package batch

import (
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"os"
	"path/filepath"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/analysis"
	"github.com/desmear/desmear/unfold/internal/atomicfile"
	"github.com/desmear/desmear/unfold/validate"
)

// PlanFile is the name of the plan in a work folder.
const PlanFile = "plan.json"

// Format is the version of plan.json and of the shard files.
const Format = 1

// Kind is the kind of ensemble a plan splits.
type Kind string

// The kinds of ensemble.
const (
	// Toys: the toy ensemble of a validation.
	Toys Kind = "toys"
	// Response: the response built in parts, each a consecutive block
	// of the response shards (ranges of simulated events), merged in
	// shard order into the bundle of a build in one run.
	Response Kind = "response"
	// Replicas: the bootstrap replicas of the simulation of an analysis
	// (uncertainty.replicas), in units of analysis.ReplicaUnit, merged
	// with the nominal result into the result folder of one run.
	Replicas Kind = "replicas"
	// Variations: the systematic variations of an analysis, one unit
	// each (an up/down pair is one unit), merged with the nominal
	// result into the result folder of one run.
	Variations Kind = "variations"
)

// Kinds lists the kinds of ensemble.
func Kinds() []Kind { return []Kind{Toys, Response, Replicas, Variations} }

// MarshalText implements encoding.TextMarshaler.
func (k Kind) MarshalText() ([]byte, error) { return []byte(k), nil }

// UnmarshalText implements encoding.TextUnmarshaler: it accepts the
// names of Kinds.
func (k *Kind) UnmarshalText(b []byte) error {
	for _, c := range Kinds() {
		if string(b) == string(c) {
			*k = c
			return nil
		}
	}
	return fmt.Errorf("unknown kind of ensemble %q (want toys, response, replicas or variations)", b)
}

// what names the ensemble of the kind in messages.
func (k Kind) what() string {
	switch k {
	case Toys:
		return "toys"
	case Response:
		return "a response"
	case Variations:
		return "systematic variations"
	case Replicas:
		return "bootstrap replicas"
	}
	return string(k)
}

// Check reports whether a plan of this kind can be made.
func (k Kind) Check() error {
	switch k {
	case Toys, Response, Variations, Replicas:
		return nil
	}
	return fmt.Errorf("batch: unknown kind of ensemble %q", string(k))
}

// Input is a file referenced by content.
type Input struct {
	Path   string `json:"path"`
	SHA256 string `json:"sha256"`
}

// ToySettings are the settings of a validation's toy ensemble, as the
// front end that made the plan gave them; every shard and the merge
// rebuild the ensemble from them.
type ToySettings struct {
	Toys          int                `json:"toys"`
	MaxIterations int                `json:"max_iterations"`
	Seed          uint64             `json:"seed"`
	Truth         string             `json:"toy_truth"`
	Criterion     validate.Criterion `json:"criterion"`
	BiasThreshold float64            `json:"bias_threshold"`
	TiltPercent   float64            `json:"tilt_percent"`
}

// Unit is one unit of work: the toys FirstToy..FirstToy+Toys−1, toy t
// drawing from the PCG stream (Seed, StreamBase + t).
type Unit struct {
	Index      int    `json:"index"`
	FirstToy   int    `json:"first_toy"`
	Toys       int    `json:"toys"`
	Seed       uint64 `json:"seed"`
	StreamBase uint64 `json:"stream_base"`
}

// VariationUnit is one unit of a variations plan: the systematic
// variation Index of the analysis (in the order of analysis.Analysis
// Variations: the file's variations, then the scale uncertainties of the
// backgrounds), named Name; both changes of an up/down pair.
type VariationUnit struct {
	Index int    `json:"index"`
	Name  string `json:"name"`
}

// ReplicaUnit is one unit of a replicas plan: the bootstrap replicas
// First..First+Replicas−1 (analysis.ReplicaRange of unit Index).
type ReplicaUnit struct {
	Index    int `json:"index"`
	First    int `json:"first"`
	Replicas int `json:"replicas"`
}

// Shard is a contiguous run of units.
type Shard struct {
	Index     int `json:"index"`
	FirstUnit int `json:"first_unit"`
	Units     int `json:"units"`
}

// Plan is an ensemble split into shards (see the package documentation).
type Plan struct {
	Format   int    `json:"format"`
	Kind     Kind   `json:"kind"`
	Analysis Input  `json:"analysis"`
	Problem  string `json:"problem_sha256"`
	// Out is the folder the merge writes.
	Out string `json:"out"`
	// Toys are the settings of a toy ensemble, nil for a response.
	Toys  *ToySettings `json:"toys,omitempty"`
	Units []Unit       `json:"units,omitempty"`
	// Inputs are the input files of a variations plan with their
	// SHA-256, as the result records them (those of the variations
	// included); Variations are its units.
	Inputs     []Input         `json:"inputs,omitempty"`
	Variations []VariationUnit `json:"variations,omitempty"`
	// Replicas are the units of a replicas plan.
	Replicas []ReplicaUnit `json:"replicas,omitempty"`
	Shards   []Shard       `json:"shards"`

	id string // SHA-256 of plan.json, set by Read
}

// ID returns the identity of a plan read from its file: the SHA-256 of
// plan.json.
func (p *Plan) ID() string { return p.id }

// MaxShards returns the most shards a plan of kind k of members
// members (toys, systematic variations or bootstrap replicas) can have:
// a shard holds at least one unit, of validate.BlockToys toys, of one
// variation or of analysis.ReplicaUnit replicas. A response plan has no
// such bound.
func MaxShards(k Kind, members int) int {
	switch k {
	case Toys:
		return (members + validate.BlockToys - 1) / validate.BlockToys
	case Variations:
		return members
	case Replicas:
		return (members + analysis.ReplicaUnit - 1) / analysis.ReplicaUnit
	}
	return math.MaxInt
}

// split returns shards shards of nu units (MaxShards of the plan) of as
// equal a number of units as can be: shard s holds the units
// ⌊s·nu/shards⌋ to ⌊(s+1)·nu/shards⌋ − 1, or none in a response plan.
// More shards than units are refused, saying of what (of, "520 toys")
// and what a unit is (unit, "block of 50 toys").
func split(nu, shards int, of, unit string) ([]Shard, error) {
	switch {
	case shards < 1:
		return nil, &unfold.SettingsError{Field: "Shards", Reason: "must be at least 1"}
	case shards > nu:
		return nil, &unfold.SettingsError{Field: "Shards", Reason: fmt.Sprintf("%d shards of %s: a shard holds at least one %s, so at most %d shards", shards, of, unit, nu)}
	}
	sh := make([]Shard, shards)
	for s := range sh {
		sh[s].Index = s
		if nu != math.MaxInt {
			lo, hi := s*nu/shards, (s+1)*nu/shards
			sh[s].FirstUnit, sh[s].Units = lo, hi-lo
		}
	}
	return sh, nil
}

// ToyPlan returns the plan of the toy ensemble of settings ts over
// shards shards: units of validate.BlockToys toys (the last one fewer),
// split into shards of as equal a number of units as can be.
func ToyPlan(analysis Input, problem string, ts ToySettings, shards int, out string) (*Plan, error) {
	if ts.Toys < 2 {
		return nil, &unfold.SettingsError{Field: "Toys", Reason: "must be at least 2"}
	}
	nu := MaxShards(Toys, ts.Toys)
	sh, err := split(nu, shards, fmt.Sprintf("%d toys", ts.Toys), fmt.Sprintf("block of %d toys", validate.BlockToys))
	if err != nil {
		return nil, err
	}
	p := &Plan{Format: Format, Kind: Toys, Analysis: analysis, Problem: problem, Out: out, Toys: &ts, Shards: sh}
	for u := range nu {
		first := u * validate.BlockToys
		p.Units = append(p.Units, Unit{Index: u, FirstToy: first, Toys: min(validate.BlockToys, ts.Toys-first), Seed: ts.Seed, StreamBase: validate.ToyStream(0)})
	}
	return p, nil
}

// ResponsePlan returns the plan of the response of the analysis built in
// parts parts: shard I of the plan is response part I of parts. The
// response's own shards are found by each part from the analysis.
func ResponsePlan(analysis Input, parts int, out string) (*Plan, error) {
	sh, err := split(MaxShards(Response, 0), parts, "", "")
	if err != nil {
		return nil, err
	}
	return &Plan{Format: Format, Kind: Response, Analysis: analysis, Out: out, Shards: sh}, nil
}

// VariationPlan returns the plan of the systematic variations named
// names (in the analysis's order) over shards shards of as equal a
// number of variations as can be; ins are every input of the analysis
// by content, problem the sum of the nominal problem (ProblemSum).
func VariationPlan(analysis Input, problem string, ins []Input, names []string, shards int, out string) (*Plan, error) {
	if len(names) == 0 {
		return nil, &unfold.SettingsError{Field: "Variations", Reason: "the analysis has no systematic variations to plan (no variations, no background scale uncertainty)"}
	}
	sh, err := split(MaxShards(Variations, len(names)), shards, fmt.Sprintf("%d systematic variations", len(names)), "variation")
	if err != nil {
		return nil, err
	}
	p := &Plan{Format: Format, Kind: Variations, Analysis: analysis, Problem: problem, Out: out, Inputs: ins, Shards: sh}
	for k, n := range names {
		p.Variations = append(p.Variations, VariationUnit{Index: k, Name: n})
	}
	return p, nil
}

// ReplicaPlan returns the plan of the bootstrap of replicas replicas in
// units of analysis.ReplicaUnit, over shards shards of as equal a number
// of units as can be; ins are every input of the analysis by content,
// problem the sum of the nominal problem (ProblemSum).
func ReplicaPlan(analysisFile Input, problem string, ins []Input, replicas, shards int, out string) (*Plan, error) {
	if replicas < 2 {
		return nil, &unfold.SettingsError{Field: "Replicas", Reason: "must be at least 2"}
	}
	nu := MaxShards(Replicas, replicas)
	sh, err := split(nu, shards, fmt.Sprintf("%d replicas", replicas), fmt.Sprintf("unit of %d replicas", analysis.ReplicaUnit))
	if err != nil {
		return nil, err
	}
	p := &Plan{Format: Format, Kind: Replicas, Analysis: analysisFile, Problem: problem, Out: out, Inputs: ins, Shards: sh}
	for u := range nu {
		first, count := analysis.ReplicaRange(replicas, u)
		p.Replicas = append(p.Replicas, ReplicaUnit{Index: u, First: first, Replicas: count})
	}
	return p, nil
}

// Members returns the number of members of the plan's ensemble: its
// toys, systematic variations or bootstrap replicas; 0 for a response.
func (p *Plan) Members() int {
	switch p.Kind {
	case Toys:
		return p.Toys.Toys
	case Variations:
		return len(p.Variations)
	case Replicas:
		n := 0
		for _, u := range p.Replicas {
			n += u.Replicas
		}
		return n
	}
	return 0
}

// MemberRange returns the members of shard s (see Members): the first
// and their number; the variations of a shard are in the analysis's
// order (Plan.Variations). It panics for a response plan, whose shards
// have no members.
func (p *Plan) MemberRange(s int) (first, count int) {
	sh := p.Shards[s]
	switch p.Kind {
	case Toys:
		for _, u := range p.Units[sh.FirstUnit : sh.FirstUnit+sh.Units] {
			count += u.Toys
		}
		return p.Units[sh.FirstUnit].FirstToy, count
	case Variations:
		return sh.FirstUnit, sh.Units
	case Replicas:
		for _, u := range p.Replicas[sh.FirstUnit : sh.FirstUnit+sh.Units] {
			count += u.Replicas
		}
		return p.Replicas[sh.FirstUnit].First, count
	}
	panic(fmt.Sprintf("batch: the shards of a plan of %s have no members", p.Kind))
}

// Write writes the plan as plan.json in the work folder dir, creating
// dir; it is an error if dir holds a plan already.
func (p *Plan) Write(dir string) error {
	path := filepath.Join(dir, PlanFile)
	if _, err := os.Stat(path); err == nil {
		return fmt.Errorf("%s: a plan exists already; plan into another folder or remove it", path)
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	js, err := json.MarshalIndent(p, "", "  ")
	if err != nil {
		return err
	}
	return atomicfile.Write(path, func(w io.Writer) error {
		_, err := w.Write(append(js, '\n'))
		return err
	})
}

// Read reads the plan of the work folder dir.
func Read(dir string) (*Plan, error) {
	path := filepath.Join(dir, PlanFile)
	b, err := os.ReadFile(path)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return nil, fmt.Errorf("%s: no plan in this folder: %w", path, err)
		}
		return nil, err
	}
	var p Plan
	if err := json.Unmarshal(b, &p); err != nil {
		return nil, fmt.Errorf("%s: not a plan: %v", path, err)
	}
	if p.Format != Format {
		return nil, fmt.Errorf("%s: plan format %d, this program reads format %d", path, p.Format, Format)
	}
	if err := p.Kind.Check(); err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	if err := p.check(); err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	sum := sha256.Sum256(b)
	p.id = hex.EncodeToString(sum[:])
	return &p, nil
}

// check reports whether the units cover the toys in order and the shards
// the units.
func (p *Plan) check() error {
	if p.Kind == Response {
		for i, s := range p.Shards {
			if s.Index != i || s.Units != 0 {
				return fmt.Errorf("shard %d is not part %d of the response", i, i)
			}
		}
		if len(p.Shards) == 0 || p.Toys != nil || len(p.Units) > 0 {
			return fmt.Errorf("a response plan has parts and no toys")
		}
		return nil
	}
	if p.Kind == Variations {
		if p.Toys != nil || len(p.Units) > 0 {
			return fmt.Errorf("a plan of systematic variations has no toys")
		}
		for i, u := range p.Variations {
			if u.Index != i || u.Name == "" {
				return fmt.Errorf("variation %d does not continue the variations before it", i)
			}
		}
		return p.checkShards(len(p.Variations))
	}
	if p.Kind == Replicas {
		if p.Toys != nil || len(p.Units) > 0 || len(p.Variations) > 0 {
			return fmt.Errorf("a plan of bootstrap replicas has no toys and no variations")
		}
		n := p.Members()
		for i, u := range p.Replicas {
			if first, count := analysis.ReplicaRange(n, i); u.Index != i || u.First != first || u.Replicas != count {
				return fmt.Errorf("replica unit %d does not continue the units before it", i)
			}
		}
		return p.checkShards(len(p.Replicas))
	}
	if p.Toys == nil {
		return fmt.Errorf("a toy plan without toy settings")
	}
	next := 0
	for i, u := range p.Units {
		if u.Index != i || u.FirstToy != next || u.Toys < 1 {
			return fmt.Errorf("unit %d does not continue the units before it", i)
		}
		next += u.Toys
	}
	if next != p.Toys.Toys {
		return fmt.Errorf("the units hold %d toys, the plan %d", next, p.Toys.Toys)
	}
	return p.checkShards(len(p.Units))
}

// checkShards reports whether the shards cover the n units in order.
func (p *Plan) checkShards(n int) error {
	nu := 0
	for i, s := range p.Shards {
		if s.Index != i || s.FirstUnit != nu || s.Units < 1 {
			return fmt.Errorf("shard %d does not continue the shards before it", i)
		}
		nu += s.Units
	}
	if nu != n || len(p.Shards) == 0 {
		return fmt.Errorf("the shards hold %d units, the plan %d", nu, n)
	}
	return nil
}

// CheckAnalysis reports whether the analysis file, of SHA-256 sum
// (FileSum), is the one the plan was made from.
func (p *Plan) CheckAnalysis(sum string) error {
	if sum != p.Analysis.SHA256 {
		return fmt.Errorf("%s has changed since the plan was made (SHA-256 %s, the plan has %s): make a new plan", p.Analysis.Path, short(sum), short(p.Analysis.SHA256))
	}
	return nil
}

// CheckProblem reports whether the problem assembled from the plan's
// analysis file, of SHA-256 sum (ProblemSum), is the one the plan was
// made from. A response plan names no problem.
func (p *Plan) CheckProblem(sum string) error {
	if p.Kind != Response && sum != p.Problem {
		return fmt.Errorf("the inputs of %s (response, data or backgrounds) have changed since the plan was made (SHA-256 %s, the plan has %s): make a new plan", p.Analysis.Path, short(sum), short(p.Problem))
	}
	return nil
}

func short(s string) string { return s[:min(12, len(s))] }

// FileSum returns the SHA-256 of the file at path, in hex.
func FileSum(path string) (string, error) {
	f, err := os.Open(path)
	if err != nil {
		return "", err
	}
	defer f.Close()
	h := sha256.New()
	if _, err := io.Copy(h, f); err != nil {
		return "", err
	}
	return hex.EncodeToString(h.Sum(nil)), nil
}

// ProblemSum returns the SHA-256, in hex, of the inputs of p: the
// migrations (their encoding), the generated counts, the data, the
// background, their variances and the prior, each with its length (a
// nil vector differs from an empty one).
func ProblemSum(p *unfold.Problem) (string, error) {
	h := sha256.New()
	if p.Migrations == nil {
		return "", fmt.Errorf("batch: the problem has no migrations")
	}
	if _, err := p.Migrations.WriteTo(h); err != nil {
		return "", err
	}
	var b [8]byte
	for _, v := range [][]float64{p.Generated, p.Data, p.DataVariance, p.Background, p.BackgroundVariance, p.Prior} {
		n := uint64(len(v)) + 1
		if v == nil {
			n = 0
		}
		binary.LittleEndian.PutUint64(b[:], n)
		h.Write(b[:])
		for _, x := range v {
			binary.LittleEndian.PutUint64(b[:], math.Float64bits(x))
			h.Write(b[:])
		}
	}
	return hex.EncodeToString(h.Sum(nil)), nil
}
