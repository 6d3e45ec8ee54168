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

// variedEstimates is the varied estimates of one variation in a shard
// file: one for a single change, up and down for a pair.
type variedEstimates struct {
	Name      string  `json:"name"`
	Estimates []exact `json:"estimates"`
}

// variedFile is the file of one shard of a variations plan.
type variedFile struct {
	shardHead
	FirstVariation int               `json:"first_variation"`
	Varied         []variedEstimates `json:"varied"`
}

func (f *variedFile) members() int { return len(f.Varied) }

func (f *variedFile) holds(p *Plan, s int, path string) error {
	first, count := p.MemberRange(s)
	if f.FirstVariation != first || len(f.Varied) != count {
		return fmt.Errorf("%s: does not hold shard %d of the plan (variations %d..%d)", path, s, first, first+count-1)
	}
	for i, v := range f.Varied {
		if v.Name != p.Variations[first+i].Name || len(v.Estimates) == 0 {
			return fmt.Errorf("%s: does not hold the variation %q of shard %d", path, p.Variations[first+i].Name, s)
		}
	}
	return nil
}

// RunVariations runs shard s of the variations plan p: it unfolds each
// of its variations against the nominal unfolding n (made from the
// plan's inputs) and writes the varied estimates as the shard's file,
// atomically. It does nothing and returns false when the shard's file
// exists and belongs to the plan; it returns true when it ran the shard.
func RunVariations(ctx context.Context, dir string, p *Plan, s int, n *analysis.Nominal) (bool, error) {
	return runShard(ctx, dir, p, s, Variations, func() (*variedFile, error) {
		first, count := p.MemberRange(s)
		f := &variedFile{FirstVariation: first}
		for k := first; k < first+count; k++ {
			vd, err := n.Vary(ctx, k)
			if err != nil {
				return nil, err
			}
			if vd.Name != p.Variations[k].Name {
				return nil, fmt.Errorf("batch: variation %d of the analysis is %q, of the plan %q: make a new plan", k, vd.Name, p.Variations[k].Name)
			}
			v := variedEstimates{Name: vd.Name}
			for _, e := range vd.Estimates {
				v.Estimates = append(v.Estimates, exact(e))
			}
			f.Varied = append(f.Varied, v)
		}
		return f, nil
	})
}

// MergeVariations reads every shard of the variations plan and returns
// the varied estimates of all its variations, in the analysis's order
// (what analysis.Nominal.Finish takes). It is an error, listing the
// shards, if any is missing or does not belong to the plan.
func MergeVariations(dir string, p *Plan) ([]*analysis.Varied, error) {
	var out []*analysis.Varied
	err := mergeShards(dir, p, Variations, func(f *variedFile) {
		for _, v := range f.Varied {
			vd := &analysis.Varied{Name: v.Name}
			for _, e := range v.Estimates {
				vd.Estimates = append(vd.Estimates, []float64(e))
			}
			out = append(out, vd)
		}
	})
	if err != nil {
		return nil, err
	}
	return out, nil
}
