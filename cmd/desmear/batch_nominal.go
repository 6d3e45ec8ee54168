package main

import (
	"context"
	"errors"
	"fmt"

	"github.com/desmear/desmear/unfold/analysis"
	"github.com/desmear/desmear/unfold/batch"
	"github.com/desmear/desmear/unfold/result"
)

// planNominal writes a plan of the analysis at path whose shards unfold
// its nominal data again, as the variations and replicas plans do: the
// nominal unfolding done once here for the sums of its inputs. check
// refuses what cannot be planned of the loaded analysis (before the
// unfolding), and newPlan makes the plan from the analysis file, the sums of
// the problem and the inputs, and the folder the merge writes.
func planNominal(ctx context.Context, g *globalOptions, o *batchPlanOptions, path string,
	check func(a *analysis.Analysis) error,
	newPlan func(in batch.Input, psum string, ins []batch.Input, out string) (*batch.Plan, error)) error {
	abs, _, err := planFiles(path, "", "")
	if err != nil {
		return err
	}
	a, err := analysis.Load(abs)
	if err != nil {
		return analysisErr(err)
	}
	if err := check(a); err != nil {
		return err
	}
	_, out, err := planFiles(abs, o.out, a.Output.Folder)
	if err != nil {
		return err
	}
	n, err := nominalWith(ctx, a, &analysis.Options{Version: version})
	if err != nil {
		return err
	}
	in, err := fileInput(abs)
	if err != nil {
		return err
	}
	psum, ins, err := nominalSums(n)
	if err != nil {
		return err
	}
	p, err := newPlan(in, psum, ins, out)
	return writePlan(g, o, p, err)
}

// nominalWith unfolds the nominal data of the analysis a, as "desmear
// unfold ANALYSIS.yaml" does before its variations.
func nominalWith(ctx context.Context, a *analysis.Analysis, opt *analysis.Options) (*analysis.Nominal, error) {
	n, err := a.Nominal(ctx, opt)
	if err != nil {
		if ctx.Err() != nil {
			return nil, ctx.Err()
		}
		return nil, analysisErr(err)
	}
	return n, nil
}

// nominalSums returns the sum of the nominal problem and every input of
// the analysis by content.
func nominalSums(n *analysis.Nominal) (string, []batch.Input, error) {
	psum, err := batch.ProblemSum(n.Problem())
	if err != nil {
		return "", nil, inputErr(err)
	}
	fs, err := n.Inputs()
	if err != nil {
		return "", nil, inputErr(err)
	}
	ins := make([]batch.Input, len(fs))
	for i, f := range fs {
		ins[i] = batch.Input{Path: f.Path, SHA256: f.SHA256}
	}
	return psum, ins, nil
}

// nominalJob is a plan whose shards unfold the nominal data of its
// analysis file again (in its own process on a cluster), checking its
// inputs against the plan, and whose merge writes the result folder of
// "desmear unfold ANALYSIS.yaml": what the variations and replicas jobs
// share.
type nominalJob struct {
	p *batch.Plan
}

func loadNominalJob(p *batch.Plan) (nominalJob, error) {
	// The analysis file first, before anything is unfolded: the
	// problem's sum is checked once it is assembled.
	if err := checkPlanFile(p); err != nil {
		return nominalJob{}, err
	}
	return nominalJob{p: p}, nil
}

func (j *nominalJob) plan() *batch.Plan { return j.p }

// nominal loads the plan's analysis, unfolds the nominal data (with the
// options opt) and checks the inputs against the plan.
func (j *nominalJob) nominal(ctx context.Context, opt *analysis.Options) (*analysis.Analysis, *analysis.Nominal, error) {
	a, err := analysis.Load(j.p.Analysis.Path)
	if err != nil {
		return nil, nil, analysisErr(err)
	}
	n, err := nominalWith(ctx, a, opt)
	if err != nil {
		return nil, nil, err
	}
	psum, ins, err := nominalSums(n)
	if err != nil {
		return nil, nil, err
	}
	if err := checkProblem(j.p, psum); err != nil {
		return nil, nil, err
	}
	if err := j.p.CheckFiles(ins); err != nil {
		return nil, nil, inputErr(err)
	}
	return a, n, nil
}

// runNominal runs shard s with run (batch.RunVariations, RunReplicas)
// on the nominal unfolding.
func (j *nominalJob) runNominal(ctx context.Context, s int, run func(n *analysis.Nominal) (bool, error)) error {
	_, n, err := j.nominal(ctx, &analysis.Options{Version: version})
	if err != nil {
		return err
	}
	if _, err := run(n); err != nil {
		return analysisErr(fmt.Errorf("shard %d: %w", s, err))
	}
	return nil
}

// finish unfolds the nominal data of the plan's analysis (with a
// progress bar), runs done on it to write the result folder of the plan
// and prints what "desmear unfold ANALYSIS.yaml" prints.
func (j *nominalJob) finish(ctx context.Context, g *globalOptions, done func(context.Context, *analysis.Analysis, *analysis.Nominal) (*analysis.Outcome, error)) error {
	p := j.p
	pr := newProgress(g)
	defer pr.finish()
	a, n, err := j.nominal(ctx, &analysis.Options{Version: version, Progress: pr.report})
	if err != nil {
		return err
	}
	a.Output.Folder = p.Out
	out, err := done(ctx, a, n)
	pr.finish()
	if err != nil {
		if ctx.Err() != nil {
			return ctx.Err()
		}
		if errors.Is(err, result.ErrExists) || errors.Is(err, result.ErrNotResult) {
			return refused(err, p)
		}
		return analysisErr(err)
	}
	printRunNotes(g, a, out)
	return printAnalysisOutcome(g, a, out)
}
