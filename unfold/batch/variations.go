package batch

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"math"
	"strconv"

	"github.com/desmear/desmear/unfold/analysis"
)

// CheckFiles reports whether the input files ins (path and SHA-256, as
// the analysis lists them now) are those of the variations plan.
func (p *Plan) CheckFiles(ins []Input) error {
	if len(ins) != len(p.Inputs) {
		return fmt.Errorf("%s lists %d input files, %d when the plan was made: make a new plan", p.Analysis.Path, len(ins), len(p.Inputs))
	}
	for i, in := range ins {
		if was := p.Inputs[i]; in != was {
			return fmt.Errorf("the input %s (SHA-256 %s) of %s is not the plan's %s (SHA-256 %s): it has changed since the plan was made; make a new plan", in.Path, short(in.SHA256), p.Analysis.Path, was.Path, short(was.SHA256))
		}
	}
	return nil
}

// VariationRange returns the variations of shard s: first and count.
func (p *Plan) VariationRange(s int) (first, count int) {
	sh := p.Shards[s]
	return sh.FirstUnit, sh.Units
}

// exact is a vector written in JSON so that it reads back bit for bit:
// finite numbers in the shortest form that parses back to the same
// float64, and NaN, +Inf and −Inf as the strings "NaN", "+Inf", "-Inf".
type exact []float64

// MarshalJSON implements json.Marshaler.
func (v exact) MarshalJSON() ([]byte, error) {
	b := []byte{'['}
	for i, x := range v {
		if i > 0 {
			b = append(b, ',')
		}
		switch {
		case math.IsNaN(x):
			b = append(b, `"NaN"`...)
		case math.IsInf(x, 1):
			b = append(b, `"+Inf"`...)
		case math.IsInf(x, -1):
			b = append(b, `"-Inf"`...)
		default:
			b = strconv.AppendFloat(b, x, 'g', -1, 64)
		}
	}
	return append(b, ']'), nil
}

// UnmarshalJSON implements json.Unmarshaler.
func (v *exact) UnmarshalJSON(b []byte) error {
	var raw []json.RawMessage
	if err := json.Unmarshal(b, &raw); err != nil {
		return err
	}
	out := make(exact, len(raw))
	for i, r := range raw {
		if len(r) > 0 && r[0] == '"' {
			var s string
			if err := json.Unmarshal(r, &s); err != nil {
				return err
			}
			switch s {
			case "NaN":
				out[i] = math.NaN()
			case "+Inf":
				out[i] = math.Inf(1)
			case "-Inf":
				out[i] = math.Inf(-1)
			default:
				return fmt.Errorf("element %d: %q is not a number", i, s)
			}
			continue
		}
		x, err := strconv.ParseFloat(string(bytes.TrimSpace(r)), 64)
		if err != nil {
			return fmt.Errorf("element %d: %v", i, err)
		}
		out[i] = x
	}
	*v = out
	return nil
}

// variedFile is the varied estimates of one variation in a shard file:
// one for a single change, up and down for a pair.
type variedFile struct {
	Name      string  `json:"name"`
	Estimates []exact `json:"estimates"`
}

// variedPartial is the file of one shard of a variations plan.
type variedPartial struct {
	Format         int          `json:"format"`
	Plan           string       `json:"plan"`
	Shard          int          `json:"shard"`
	FirstVariation int          `json:"first_variation"`
	Varied         []variedFile `json:"varied"`
}

// readVaried reads the file of shard s of a variations plan, as
// readShard does for toys.
func (p *Plan) readVaried(dir string, s int) (*variedPartial, error) {
	var pt variedPartial
	path, err := p.readShardFile(dir, s, &pt, &pt.Format, &pt.Plan)
	if err != nil {
		return nil, err
	}
	first, count := p.VariationRange(s)
	switch {
	case pt.Shard != s || pt.FirstVariation != first || len(pt.Varied) != count:
		return nil, fmt.Errorf("%s: does not hold shard %d of the plan (variations %d..%d)", path, s, first, first+count-1)
	}
	for i, v := range pt.Varied {
		if v.Name != p.Variations[first+i].Name || len(v.Estimates) == 0 {
			return nil, fmt.Errorf("%s: does not hold the variation %q of shard %d", path, p.Variations[first+i].Name, s)
		}
	}
	return &pt, nil
}

// VariedDone reports whether shard s of the variations plan is present
// and belongs to it (then running it again does nothing).
func (p *Plan) VariedDone(dir string, s int) bool {
	_, err := p.readVaried(dir, s)
	return err == nil
}

// RunVariations runs shard s of the variations plan p: it unfolds each
// of its variations against the nominal unfolding n (made from the
// plan's inputs) and writes the varied estimates as the shard's file,
// atomically. It does nothing and returns false when the shard's file
// exists and belongs to the plan; it returns true when it ran the shard.
func RunVariations(ctx context.Context, dir string, p *Plan, s int, n *analysis.Nominal) (bool, error) {
	if s < 0 || s >= len(p.Shards) {
		return false, fmt.Errorf("batch: shard %d: the plan has shards 0..%d", s, len(p.Shards)-1)
	}
	if p.Kind != Variations {
		return false, fmt.Errorf("batch: the plan is of %s, not of systematic variations", p.Kind)
	}
	if _, err := p.readVaried(dir, s); err == nil {
		return false, nil
	}
	first, count := p.VariationRange(s)
	pt := &variedPartial{Format: Format, Plan: p.id, Shard: s, FirstVariation: first}
	for k := first; k < first+count; k++ {
		vd, err := n.Vary(ctx, k)
		if err != nil {
			return false, err
		}
		if vd.Name != p.Variations[k].Name {
			return false, fmt.Errorf("batch: variation %d of the analysis is %q, of the plan %q: make a new plan", k, vd.Name, p.Variations[k].Name)
		}
		f := variedFile{Name: vd.Name}
		for _, e := range vd.Estimates {
			f.Estimates = append(f.Estimates, exact(e))
		}
		pt.Varied = append(pt.Varied, f)
	}
	return true, writeShardFile(ctx, dir, s, pt)
}

// MergeVariations reads every shard of the variations plan and returns
// the varied estimates of all its variations, in the analysis's order
// (what analysis.Nominal.Finish takes). It is an error, listing the
// shards, if any is missing or does not belong to the plan.
func MergeVariations(dir string, p *Plan) ([]*analysis.Varied, error) {
	if p.Kind != Variations {
		return nil, fmt.Errorf("batch: the plan is of %s, not of systematic variations", p.Kind)
	}
	if err := p.done(dir); err != nil {
		return nil, err
	}
	var out []*analysis.Varied
	for s := range p.Shards {
		pt, err := p.readVaried(dir, s)
		if err != nil {
			return nil, err
		}
		for _, f := range pt.Varied {
			vd := &analysis.Varied{Name: f.Name}
			for _, e := range f.Estimates {
				vd.Estimates = append(vd.Estimates, []float64(e))
			}
			out = append(out, vd)
		}
	}
	return out, nil
}
