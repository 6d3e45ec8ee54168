package batch

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"github.com/desmear/desmear/unfold/internal/atomicfile"
	"github.com/desmear/desmear/unfold/response"
	"github.com/desmear/desmear/unfold/validate"
)

// ShardDir is the folder of the shard files in a work folder.
const ShardDir = "shards"

// ShardPath returns the path of the file of shard s in the work folder
// dir.
func ShardPath(dir string, s int) string {
	return filepath.Join(dir, ShardDir, fmt.Sprintf("shard-%05d.json", s))
}

// partial is the file of one shard: the plan it belongs to, its number
// and the moments of its toys.
type partial struct {
	Format   int                `json:"format"`
	Plan     string             `json:"plan"`
	Shard    int                `json:"shard"`
	FirstToy int                `json:"first_toy"`
	Toys     int                `json:"toys"`
	Ensemble *validate.Ensemble `json:"ensemble"`
}

// PartPath returns the folder of response part s in the work folder
// dir.
func PartPath(dir string, s int) string {
	return filepath.Join(dir, PartDir, fmt.Sprintf("part-%05d", s))
}

// PartDir is the folder of the response parts in a work folder.
const PartDir = "parts"

// readPart reads response part s; a missing part is reported with
// fs.ErrNotExist, a part of another analysis file or plan with an error
// saying so.
func (p *Plan) readPart(dir string, s int) (*response.Part, error) {
	path := PartPath(dir, s)
	if _, err := os.Stat(path); err != nil {
		return nil, err
	}
	pt, err := response.LoadPart(path)
	if err != nil {
		return nil, err
	}
	if pt.Info.Analysis != p.Analysis.SHA256 || pt.Info.Index != s || pt.Info.Count != len(p.Shards) {
		return nil, fmt.Errorf("%s: part %d of %d of another analysis file, not part %d of %d of the plan", path, pt.Info.Index, pt.Info.Count, s, len(p.Shards))
	}
	return pt, nil
}

// PartDone reports whether response part s of the plan is present and
// belongs to it (then running it again does nothing).
func (p *Plan) PartDone(dir string, s int) bool {
	_, err := p.readPart(dir, s)
	return err == nil
}

// readShard reads the file of shard s; a missing file is reported with
// fs.ErrNotExist, a file of another plan or shard, or a damaged one, with
// an error saying so.
func (p *Plan) readShard(dir string, s int) (*partial, error) {
	var pt partial
	path, err := p.readShardFile(dir, s, &pt, &pt.Format, &pt.Plan)
	if err != nil {
		return nil, err
	}
	first, count := p.ToyRange(s)
	switch {
	case pt.Shard != s || pt.FirstToy != first || pt.Toys != count || pt.Ensemble == nil || pt.Ensemble.Toys() != count:
		return nil, fmt.Errorf("%s: does not hold shard %d of the plan (toys %d..%d)", path, s, first, first+count-1)
	}
	return &pt, nil
}

// RunShard runs shard s of the plan with the toy ensemble c (made from
// the plan's settings and inputs) and writes its file atomically. It
// does nothing and returns false when the shard's file exists and
// belongs to the plan; it returns true when it ran the shard.
func RunShard(ctx context.Context, dir string, p *Plan, s int, c *validate.Config) (bool, error) {
	if s < 0 || s >= len(p.Shards) {
		return false, fmt.Errorf("batch: shard %d: the plan has shards 0..%d", s, len(p.Shards)-1)
	}
	if p.Kind != Toys {
		return false, fmt.Errorf("batch: the plan is of a %s, not of toys", p.Kind)
	}
	if _, err := p.readShard(dir, s); err == nil {
		return false, nil
	}
	if c.Toys != p.Toys.Toys || c.Seed != p.Toys.Seed || c.MaxK != p.Toys.MaxIterations {
		return false, fmt.Errorf("batch: the toy ensemble does not match the plan (toys, seed or iterations differ)")
	}
	first, count := p.ToyRange(s)
	e, err := validate.Run(ctx, c, first, count)
	if err != nil {
		return false, err
	}
	return true, writeShardFile(ctx, dir, s, &partial{Format: Format, Plan: p.id, Shard: s, FirstToy: first, Toys: count, Ensemble: e})
}

// Progress is the state of a plan's shards, from their files.
type Progress struct {
	// Done lists the shards whose file belongs to the plan, Missing
	// those without a file.
	Done, Missing []int
	// Bad maps the shards whose file is damaged or belongs to another
	// plan to the reason.
	Bad map[int]error
	// ToysDone is the number of toys of the shards done, VariationsDone
	// the number of systematic variations, ReplicasDone the number of
	// bootstrap replicas.
	ToysDone, VariationsDone, ReplicasDone int
}

// Status reads the shard files of the work folder dir.
func Status(dir string, p *Plan) (*Progress, error) {
	pr := &Progress{Bad: map[int]error{}}
	for s := range p.Shards {
		var err error
		toys := 0
		switch p.Kind {
		case Response:
			_, err = p.readPart(dir, s)
		case Replicas:
			var pt *replicaPartial
			if pt, err = p.readReplicas(dir, s); err == nil {
				for _, e := range pt.Units {
					pr.ReplicasDone += int(e.N)
				}
			}
		case Variations:
			var pt *variedPartial
			if pt, err = p.readVaried(dir, s); err == nil {
				pr.VariationsDone += len(pt.Varied)
			}
		default:
			var pt *partial
			if pt, err = p.readShard(dir, s); err == nil {
				toys = pt.Toys
			}
		}
		switch {
		case err == nil:
			pr.Done = append(pr.Done, s)
			pr.ToysDone += toys
		case errors.Is(err, fs.ErrNotExist):
			pr.Missing = append(pr.Missing, s)
		default:
			var pe *fs.PathError
			if errors.As(err, &pe) {
				return nil, err // unreadable: not a property of the shard
			}
			pr.Bad[s] = err
		}
	}
	return pr, nil
}

// Todo returns the shards to run again: missing or bad, in order.
func (pr *Progress) Todo() []int {
	t := append([]int(nil), pr.Missing...)
	for s := range pr.Bad {
		t = append(t, s)
	}
	slices.Sort(t)
	return t
}

// done checks that every shard of the plan is done, listing those that
// are not.
func (p *Plan) done(dir string) error {
	pr, err := Status(dir, p)
	if err != nil {
		return err
	}
	if todo := pr.Todo(); len(todo) > 0 {
		var why []string
		if len(pr.Missing) > 0 {
			why = append(why, fmt.Sprintf("missing: %s", Ranges(pr.Missing)))
		}
		for _, s := range todo {
			if err := pr.Bad[s]; err != nil {
				why = append(why, err.Error())
			}
		}
		return fmt.Errorf("batch: %d of %d shards are not done (%s): run them, then merge", len(todo), len(p.Shards), strings.Join(why, "; "))
	}
	return nil
}

// MergeResponse reads every response part of the plan and merges them
// in shard order (response.MergeParts): the response of one build, bit
// for bit. It is an error, listing the parts, if any is missing or does
// not belong to the plan.
func MergeResponse(dir string, p *Plan) (*response.Built, *response.BundleInfo, error) {
	if p.Kind != Response {
		return nil, nil, fmt.Errorf("batch: the plan is of %s, not of a response", p.Kind)
	}
	if err := p.done(dir); err != nil {
		return nil, nil, err
	}
	parts := make([]*response.Part, len(p.Shards))
	names := make([]string, len(p.Shards))
	for s := range p.Shards {
		pt, err := p.readPart(dir, s)
		if err != nil {
			return nil, nil, err
		}
		parts[s], names[s] = pt, PartPath(dir, s)
	}
	return response.MergeParts(parts, names)
}

// Merge reads every shard of the plan and merges their toys in toy
// order: the ensemble of one run over every toy, bit for bit. It is an
// error, listing the shards, if any is missing or does not belong to the
// plan.
func Merge(dir string, p *Plan) (*validate.Ensemble, error) {
	if p.Kind != Toys {
		return nil, fmt.Errorf("batch: the plan is of a %s, not of toys", p.Kind)
	}
	if err := p.done(dir); err != nil {
		return nil, err
	}
	parts := make([]*validate.Ensemble, len(p.Shards))
	for s := range p.Shards {
		pt, err := p.readShard(dir, s)
		if err != nil {
			return nil, err
		}
		parts[s] = pt.Ensemble
	}
	return validate.Merge(parts...)
}

// Ranges writes increasing numbers as ranges: "0-3,7,9-10".
func Ranges(v []int) string {
	var b strings.Builder
	for i := 0; i < len(v); {
		j := i
		for j+1 < len(v) && v[j+1] == v[j]+1 {
			j++
		}
		if b.Len() > 0 {
			b.WriteByte(',')
		}
		b.WriteString(strconv.Itoa(v[i]))
		if j > i {
			b.WriteByte('-')
			b.WriteString(strconv.Itoa(v[j]))
		}
		i = j + 1
	}
	return b.String()
}

// writeShardFile writes v as the JSON file of shard s in dir, atomically
// (the earlier file or nothing after a failure).
func writeShardFile(ctx context.Context, dir string, s int, v any) error {
	js, err := json.Marshal(v)
	if err != nil {
		return err
	}
	if err := os.MkdirAll(filepath.Join(dir, ShardDir), 0o755); err != nil {
		return err
	}
	if err := ctx.Err(); err != nil {
		return err
	}
	return atomicfile.Write(ShardPath(dir, s), func(w io.Writer) error {
		_, err := w.Write(js)
		return err
	})
}

// readShardFile reads the JSON file of shard s in dir into v and checks
// the format and plan it records (format and plan point at the fields
// of v that hold them); a missing file is reported with fs.ErrNotExist.
func (p *Plan) readShardFile(dir string, s int, v any, format *int, plan *string) (string, error) {
	path := ShardPath(dir, s)
	b, err := os.ReadFile(path)
	if err != nil {
		return path, err
	}
	if err := json.Unmarshal(b, v); err != nil {
		return path, fmt.Errorf("%s: not a shard file: %v", path, err)
	}
	switch {
	case *format != Format:
		return path, fmt.Errorf("%s: shard format %d, want %d", path, *format, Format)
	case *plan != p.id:
		return path, fmt.Errorf("%s: belongs to another plan (%s, this plan is %s)", path, short(*plan), short(p.id))
	}
	return path, nil
}
