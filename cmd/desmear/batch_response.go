package main

import (
	"context"
	"fmt"
	"os"
	"path/filepath"

	"github.com/desmear/desmear/unfold/analysis"
	"github.com/desmear/desmear/unfold/batch"
)

// planResponse writes the plan of a response built in parts.
func planResponse(ctx context.Context, g *globalOptions, o *batchPlanOptions, path string) error {
	abs, out, err := planFiles(path, o.out, filepath.Join(o.workdir, "response"))
	if err != nil {
		return err
	}
	if _, err := analysis.Load(abs); err != nil {
		return analysisErr(err)
	}
	in, err := fileInput(abs)
	if err != nil {
		return err
	}
	p, err := batch.ResponsePlan(in, o.shards, out)
	return writePlan(g, o, p, err)
}

// responseJob is a response plan with its analysis loaded.
type responseJob struct {
	p *batch.Plan
	a *analysis.Analysis
}

func loadResponseJob(ctx context.Context, g *globalOptions, p *batch.Plan) (shardJob, error) {
	if err := checkPlanFile(p); err != nil {
		return nil, err
	}
	a, err := analysis.Load(p.Analysis.Path)
	if err != nil {
		return nil, analysisErr(err)
	}
	return &responseJob{p: p, a: a}, nil
}

func (j *responseJob) plan() *batch.Plan { return j.p }

// run builds response part s.
func (j *responseJob) run(ctx context.Context, g *globalOptions, dir string, s int) (string, error) {
	part, err := j.a.BuildPart(ctx, s, len(j.p.Shards), &analysis.Options{Version: version, ShardEvents: shardEvents})
	if err != nil {
		return "", analysisErr(err)
	}
	if err := os.MkdirAll(filepath.Join(dir, batch.PartDir), 0o755); err != nil {
		return "", ioErr(err)
	}
	// replace a part of another plan or a damaged one
	if err := part.Save(batch.PartPath(dir, s), true); err != nil {
		return "", refusedFolder(err, batch.PartPath(dir, s), "response part", "part.json")
	}
	return fmt.Sprintf("%d shards", len(part.Numbers)), nil
}

// merge merges the response parts in order into the bundle "desmear
// response" writes.
func (j *responseJob) merge(ctx context.Context, g *globalOptions, dir string, force bool) error {
	p := j.p
	r, info, err := batch.MergeResponse(dir, p)
	if err != nil {
		return mergeErr(err, dir)
	}
	return saveMerged(g, r, info, p.Out, force, len(p.Shards))
}
