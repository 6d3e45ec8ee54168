package main

import (
	"bufio"
	"context"
	"fmt"
	"path/filepath"

	"github.com/desmear/desmear/unfold/batch"
	"github.com/desmear/desmear/unfold/validate"
)

// planToys writes the plan of the toy ensemble of a validation of the
// analysis at path.
func planToys(ctx context.Context, g *globalOptions, o *batchPlanOptions, path string) error {
	if err := o.checkToys(); err != nil {
		return err
	}
	abs, out, err := planFiles(path, o.out, filepath.Join(o.workdir, "validation"))
	if err != nil {
		return err
	}
	v, err := loadValidationAnalysis(ctx, g, abs)
	if err != nil {
		return err
	}
	if _, err := v.options(&o.validateOptions); err != nil {
		return err
	}
	in, err := fileInput(abs)
	if err != nil {
		return err
	}
	psum, err := batch.ProblemSum(v.prob)
	if err != nil {
		return inputErr(err)
	}
	ts := batch.ToySettings{Toys: o.toys, MaxIterations: o.maxK, Seed: o.seed, Truth: o.toyTruth, Criterion: o.criterion, BiasThreshold: o.threshold, TiltPercent: o.tilt}
	p, err := batch.ToyPlan(in, psum, ts, o.shards, out)
	return writePlan(g, o, p, err)
}

// toyJob is a plan with its validation set up: the inputs checked
// against the plan, the nominal result and the toys' configuration.
type toyJob struct {
	p     *batch.Plan
	v     *validation
	setup *validate.Setup
}

// loadToyJob sets the validation of the toy plan p up.
func loadToyJob(ctx context.Context, g *globalOptions, p *batch.Plan) (shardJob, error) {
	if err := checkPlanFile(p); err != nil {
		return nil, err
	}
	v, err := loadValidationAnalysis(ctx, g, p.Analysis.Path)
	if err != nil {
		return nil, err
	}
	psum, err := batch.ProblemSum(v.prob)
	if err != nil {
		return nil, inputErr(err)
	}
	if err := checkProblem(p, psum); err != nil {
		return nil, err
	}
	t := p.Toys
	vo := &validateOptions{toys: t.Toys, maxK: t.MaxIterations, criterion: t.Criterion, threshold: t.BiasThreshold, tilt: t.TiltPercent, toyTruth: t.Truth}
	vo.seed = t.Seed
	opt, err := v.options(vo)
	if err != nil {
		return nil, err
	}
	st, err := validate.NewSetup(ctx, v.prob, v.settings, opt)
	if err != nil {
		return nil, v.locate(err)
	}
	return &toyJob{p: p, v: v, setup: st}, nil
}

func (j *toyJob) plan() *batch.Plan { return j.p }

// run runs the toys of shard s.
func (j *toyJob) run(ctx context.Context, g *globalOptions, dir string, s int) (string, error) {
	if _, err := batch.RunShard(ctx, dir, j.p, s, &j.setup.Config); err != nil {
		return "", j.v.locate(fmt.Errorf("shard %d: %w", s, err))
	}
	return memberRange(j.p, s), nil
}

// merge merges the toys of the shards and writes the validation folder
// "desmear validate" writes.
func (j *toyJob) merge(ctx context.Context, g *globalOptions, dir string, force bool) error {
	out := j.p.Out
	e, err := batch.Merge(dir, j.p)
	if err != nil {
		return mergeErr(err, dir)
	}
	rep, err := j.setup.Report(ctx, e)
	if err != nil {
		if ctx.Err() != nil {
			return ctx.Err()
		}
		return j.v.locate(err)
	}
	j.v.label(rep)
	if err := writeValidation(out, force, rep); err != nil {
		return err
	}
	w := bufio.NewWriter(g.stdout)
	printValidation(w, out, rep)
	if err := w.Flush(); err != nil {
		return ioErr(err)
	}
	return nil
}
