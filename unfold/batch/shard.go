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

// shardHead is what the file of every shard of toys, variations or
// replicas starts with: the format, the plan it belongs to (its ID) and
// its shard number.
type shardHead struct {
	Format int    `json:"format"`
	Plan   string `json:"plan"`
	Shard  int    `json:"shard"`
}

func (h *shardHead) head() *shardHead { return h }

// shardFile is the content of the file of one shard: what differs
// between the kinds of plan whose shards write files.
type shardFile interface {
	head() *shardHead
	// holds reports whether the file, read from path, holds what shard
	// s of the plan p holds (its head checked already: format, plan,
	// shard number).
	holds(p *Plan, s int, path string) error
	// members returns the number of members (toys, variations,
	// replicas) it holds.
	members() int
}

// shardFileOf is a pointer to a shard file's content type F.
type shardFileOf[F any] interface {
	*F
	shardFile
}

// toysFile is the file of one shard of toys: the moments of its toys.
type toysFile struct {
	shardHead
	FirstToy int                `json:"first_toy"`
	Toys     int                `json:"toys"`
	Ensemble *validate.Ensemble `json:"ensemble"`
}

func (f *toysFile) members() int { return f.Toys }

func (f *toysFile) holds(p *Plan, s int, path string) error {
	first, count := p.MemberRange(s)
	if f.FirstToy != first || f.Toys != count || f.Ensemble == nil || f.Ensemble.Toys() != count {
		return fmt.Errorf("%s: does not hold shard %d of the plan (toys %d..%d)", path, s, first, first+count-1)
	}
	return nil
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

// readShard reads the file of shard s of the plan p into a new F; a
// missing file is reported with fs.ErrNotExist, a file of another plan
// or shard, or a damaged one, with an error saying so.
func readShard[F any, PF shardFileOf[F]](p *Plan, dir string, s int) (PF, error) {
	f := PF(new(F))
	path := ShardPath(dir, s)
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	if err := json.Unmarshal(b, f); err != nil {
		return nil, fmt.Errorf("%s: not a shard file: %v", path, err)
	}
	switch h := f.head(); {
	case h.Format != Format:
		return nil, fmt.Errorf("%s: shard format %d, want %d", path, h.Format, Format)
	case h.Plan != p.id:
		return nil, fmt.Errorf("%s: belongs to another plan (%s, this plan is %s)", path, short(h.Plan), short(p.id))
	case h.Shard != s:
		return nil, fmt.Errorf("%s: does not hold shard %d of the plan but shard %d", path, s, h.Shard)
	}
	if err := f.holds(p, s, path); err != nil {
		return nil, err
	}
	return f, nil
}

// runShard runs shard s of the plan p, of kind k: compute returns the
// content of its file (its head is filled in here), written atomically.
// It does nothing and returns false when the shard's file exists and
// belongs to the plan; it returns true when it ran the shard.
func runShard[F any, PF shardFileOf[F]](ctx context.Context, dir string, p *Plan, s int, k Kind, compute func() (PF, error)) (bool, error) {
	if s < 0 || s >= len(p.Shards) {
		return false, fmt.Errorf("batch: shard %d: the plan has shards 0..%d", s, len(p.Shards)-1)
	}
	if err := p.is(k); err != nil {
		return false, err
	}
	if _, err := readShard[F, PF](p, dir, s); err == nil {
		return false, nil
	}
	f, err := compute()
	if err != nil {
		return false, err
	}
	*f.head() = shardHead{Format: Format, Plan: p.id, Shard: s}
	return true, writeShardFile(ctx, dir, s, f)
}

// mergeShards reads every shard of the plan p, of kind k, in order and
// passes each to add. It is an error, listing the shards, if any is
// missing or does not belong to the plan.
func mergeShards[F any, PF shardFileOf[F]](dir string, p *Plan, k Kind, add func(PF)) error {
	if err := p.is(k); err != nil {
		return err
	}
	if err := p.allDone(dir); err != nil {
		return err
	}
	for s := range p.Shards {
		f, err := readShard[F, PF](p, dir, s)
		if err != nil {
			return err
		}
		add(f)
	}
	return nil
}

// is reports whether the plan is of kind k.
func (p *Plan) is(k Kind) error {
	if p.Kind != k {
		return fmt.Errorf("batch: the plan is of %s, not of %s", p.Kind, k.what())
	}
	return nil
}

// members returns the members held by f, read with err.
func members[PF shardFile](f PF, err error) (int, error) {
	if err != nil {
		return 0, err
	}
	return f.members(), nil
}

// readMembers reads the file (or the response part) of shard s and
// returns the number of members it holds (none for a response part).
func (p *Plan) readMembers(dir string, s int) (int, error) {
	switch p.Kind {
	case Response:
		_, err := p.readPart(dir, s)
		return 0, err
	case Variations:
		return members(readShard[variedFile](p, dir, s))
	case Replicas:
		return members(readShard[replicaFile](p, dir, s))
	}
	return members(readShard[toysFile](p, dir, s))
}

// ShardDone reports whether shard s of the plan is present and belongs
// to it (then running it again does nothing).
func (p *Plan) ShardDone(dir string, s int) bool {
	_, err := p.readMembers(dir, s)
	return err == nil
}

// RunShard runs shard s of the plan with the toy ensemble c (made from
// the plan's settings and inputs) and writes its file atomically. It
// does nothing and returns false when the shard's file exists and
// belongs to the plan; it returns true when it ran the shard.
func RunShard(ctx context.Context, dir string, p *Plan, s int, c *validate.Config) (bool, error) {
	return runShard(ctx, dir, p, s, Toys, func() (*toysFile, error) {
		if c.Toys != p.Toys.Toys || c.Seed != p.Toys.Seed || c.MaxK != p.Toys.MaxIterations {
			return nil, fmt.Errorf("batch: the toy ensemble does not match the plan (toys, seed or iterations differ)")
		}
		first, count := p.MemberRange(s)
		e, err := validate.Run(ctx, c, first, count)
		if err != nil {
			return nil, err
		}
		return &toysFile{FirstToy: first, Toys: count, Ensemble: e}, nil
	})
}

// Progress is the state of a plan's shards, from their files.
type Progress struct {
	// Done lists the shards whose file belongs to the plan, Missing
	// those without a file.
	Done, Missing []int
	// Bad maps the shards whose file is damaged or belongs to another
	// plan to the reason.
	Bad map[int]error
	// MembersDone is the number of members (Plan.Members: toys,
	// systematic variations or bootstrap replicas) of the shards done.
	MembersDone int
}

// Status reads the shard files of the work folder dir.
func Status(dir string, p *Plan) (*Progress, error) {
	pr := &Progress{Bad: map[int]error{}}
	for s := range p.Shards {
		n, err := p.readMembers(dir, s)
		switch {
		case err == nil:
			pr.Done = append(pr.Done, s)
			pr.MembersDone += n
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

// allDone checks that every shard of the plan is done, listing those
// that are not.
func (p *Plan) allDone(dir string) error {
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
	if err := p.is(Response); err != nil {
		return nil, nil, err
	}
	if err := p.allDone(dir); err != nil {
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
	var parts []*validate.Ensemble
	if err := mergeShards(dir, p, Toys, func(f *toysFile) { parts = append(parts, f.Ensemble) }); err != nil {
		return nil, err
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
