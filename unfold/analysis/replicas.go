package analysis

import (
	"context"
	"errors"
	"fmt"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/response"
)

// ReplicaBlock returns the number of bootstrap replicas filled in one
// pass over the simulated events for problem p under the memory limit
// (bytes; 0 means unfold.DefaultMemoryLimit): half the limit divided by
// response.ReplicaBytes, at least 1. The other half is left to the
// unfoldings.
func ReplicaBlock(p *unfold.Problem, limit int64) int {
	if limit <= 0 {
		limit = unfold.DefaultMemoryLimit
	}
	nr, nt := p.Migrations.Dims()
	return int(max(1, limit/2/response.ReplicaBytes(p.Migrations.NNZ(), nt, nr)))
}

// Replicas computes the Poisson bootstrap replicas r0 ≤ r < r1 of the
// simulated events (method.md §25) and returns the ensemble of their
// estimates, full when s asks for the full covariance, and the ensembles
// of D μ_r for each derived Jacobian D of ds (unfold.DerivedEnsembles;
// nil for none), whose covariances are the replicas' derived
// covariances (method.md §22): each replica's
// response (migrations on the pattern of p, generated counts and, when
// the fakes are background, the fakes in place of the nominal ones) is
// unfolded with method m and the nominal data of p (with negative cells
// clipped when s clips them in the nominal response). nominal is the
// response p was assembled from (its fakes are replaced). The replicas
// are filled in blocks of ReplicaBlock (one pass over the events per
// block) and added in replica order, so the bits do not depend on the
// number of cores or the block size, nor on the process that computes
// the range: ranges computed separately merge (unfold.Ensemble.Merge,
// in replica order) into the ensemble of the whole range, to rounding.
// This is the unit a plan of replica shards runs.
//
// Errors: *Error placed at the simulation for bad events, a replica
// whose response cannot be unfolded with the data (an *unfold.InputError
// wrapped with the replica's number: too few simulated events reach a
// reco bin), *unfold.SettingsError, ctx.Err().
func (a *Analysis) Replicas(ctx context.Context, nominal *response.Built, p *unfold.Problem, s *unfold.Settings, m unfold.Method, r0, r1 int, ds []*unfold.RowMatrix, opt *Options) (*unfold.Ensemble, []*unfold.Ensemble, error) {
	es, err := a.replicaEnsembles(ctx, nominal, p, s, m, r0, r1, max(1, r1-r0), ds, opt)
	if err != nil {
		return nil, nil, err
	}
	return es[0].Estimate, es[0].Derived, nil
}

// ReplicaEnsembles are the ensembles of a unit of bootstrap replicas:
// of their estimates, and of D μ_r for each derived Jacobian D (nil for
// none; method.md §22).
type ReplicaEnsembles struct {
	Estimate *unfold.Ensemble
	Derived  []*unfold.Ensemble
}

// replicaEnsembles is Replicas with ensembles of their own for every
// unit consecutive replicas from r0 on (the last one fewer): each is
// accumulated alone, in replica order, whatever the passes over the
// events.
func (a *Analysis) replicaEnsembles(ctx context.Context, nominal *response.Built, p *unfold.Problem, s *unfold.Settings, m unfold.Method, r0, r1, unit int, ds []*unfold.RowMatrix, opt *Options) ([]ReplicaEnsembles, error) {
	rs, err := s.Resolve()
	if err != nil {
		return nil, err
	}
	if len(a.Simulation) == 0 {
		return nil, &Error{File: a.File, Line: a.responseLine, Field: "uncertainty.replicas", Msg: "needs the simulated events: give the simulation"}
	}
	nt := len(p.Generated)
	ens := make([]ReplicaEnsembles, max(1, (r1-r0+unit-1)/unit))
	for u := range ens {
		ens[u] = ReplicaEnsembles{Estimate: unfold.NewEnsemble(nt, rs.Covariance == unfold.Full), Derived: unfold.DerivedEnsembles(ds)}
	}
	sims := make([]*response.Simulation, len(a.Simulation))
	for i := range a.Simulation {
		sim, src, err := a.simulation(&a.Simulation[i])
		if err != nil {
			return nil, err
		}
		defer src.Close()
		sims[i] = sim
	}
	// The background without the simulation's fakes, to which each
	// replica adds its own.
	var rest []float64
	if p.Background != nil && a.Unfolding.Fakes == "background" {
		rest = make([]float64, len(p.Background))
		for i, b := range p.Background {
			rest[i] = b - nominal.Fakes[i]
		}
	}
	block := ReplicaBlock(p, rs.MemoryLimit)
	for b0 := r0; b0 < r1; b0 += block {
		b1 := min(r1, b0+block)
		rp, err := response.FillReplicas(ctx, a.Truth, a.Reco, sims, p.Migrations, rs.Seed, b0, b1, a.fillOptions(opt, fmt.Sprintf("bootstrap replicas %d to %d", b0, b1-1)))
		if err != nil {
			return nil, a.eventsErr("simulation", a.Simulation[0].Line, err)
		}
		problem := func(r int) (*unfold.Problem, error) {
			q := *p
			i := r - b0
			if rs.NegativeCells == unfold.ClipNegative {
				// The nominal remedy, applied to the replica's cells.
				for k, v := range rp.Values[i] {
					rp.Values[i][k] = max(0, v)
				}
			}
			a, err := p.Migrations.WithValues(rp.Values[i], nil)
			if err != nil {
				return nil, err
			}
			q.Migrations, q.Generated, q.GeneratedSumW2 = a, rp.Generated[i], nil
			if rest != nil {
				bg := make([]float64, len(rest))
				for k, v := range rest {
					bg[k] = max(0, v+rp.Fakes[i][k])
				}
				q.Background = bg
			}
			return &q, nil
		}
		for k0 := b0; k0 < b1; {
			u := (k0 - r0) / unit
			k1 := min(b1, r0+(u+1)*unit)
			e := ens[u]
			add := func(_ int, est []float64) {
				e.Estimate.Add(est)
				unfold.AddDerived(e.Derived, ds, est)
			}
			if err := unfold.UnfoldEachFunc(ctx, add, &rs, m, k0, k1, problem); err != nil {
				return nil, fmt.Errorf("bootstrap replica %w", err)
			}
			k0 = k1
		}
	}
	return ens, nil
}

// ReplicaUnit is the number of bootstrap replicas of a unit: the
// ensemble of each unit of consecutive replicas is accumulated alone
// (Welford's update, in replica order), and the units are merged in
// order (unfold.Ensemble.Merge), so that units computed by separate
// processes give the bits of one run.
const ReplicaUnit = 50

// ReplicaUnits returns the number of units of the bootstrap replicas of
// the analysis (uncertainty.replicas): ⌈replicas / ReplicaUnit⌉, 0
// without replicas.
func (n *Nominal) ReplicaUnits() int { return (n.s.Replicas + ReplicaUnit - 1) / ReplicaUnit }

// ReplicaRange returns the first replica of unit u of a bootstrap of
// replicas replicas, and their number.
func ReplicaRange(replicas, u int) (first, count int) {
	first = u * ReplicaUnit
	return first, min(ReplicaUnit, replicas-first)
}

// Replicas computes the ensembles of the bootstrap replica units
// u0 ≤ u < u1 (of ReplicaUnits) against the nominal problem: what Finish
// takes, in order. It returns nil without replicas.
func (n *Nominal) Replicas(ctx context.Context, u0, u1 int) ([]ReplicaEnsembles, error) {
	a := n.a
	if n.s.Replicas == 0 || u0 >= u1 {
		return nil, nil
	}
	r0, _ := ReplicaRange(n.s.Replicas, u0)
	last, c := ReplicaRange(n.s.Replicas, u1-1)
	es, err := a.replicaEnsembles(ctx, n.out.Response, n.out.Problem, n.s, n.m, r0, last+c, ReplicaUnit, n.out.Result.DerivedJacobians, n.opt)
	var ue *unfold.InputError
	if errors.As(err, &ue) {
		return nil, &Error{File: a.File, Line: a.replicasLine, Field: "uncertainty.replicas", Err: err,
			Msg: fmt.Sprintf("%v: the response of this replica cannot be unfolded (too few simulated events in these bins, or negative weights): merge bins, clip negative cells (unfolding.negative_cells: clip) or sample the responses instead (uncertainty.response_samples)", err)}
	}
	if err != nil {
		return nil, err
	}
	return es, nil
}

// addReplicas adds the simulation source of s.Replicas bootstrap
// replicas to out.Result, from the ensembles of their units (merged in
// order), its stream, and a note on the block size to out.Notes.
func (a *Analysis) addReplicas(out *Outcome, s *unfold.Settings, units []ReplicaEnsembles) error {
	n := s.Replicas
	nu := (n + ReplicaUnit - 1) / ReplicaUnit
	if len(units) != nu {
		return fmt.Errorf("analysis: %d ensembles of bootstrap replica units for the %d units of %d replicas of %s", len(units), nu, n, a.File)
	}
	if n == 0 {
		return nil
	}
	rs, err := s.Resolve()
	if err != nil {
		return err
	}
	res := out.Result
	ens := unfold.NewEnsemble(len(res.Estimate), rs.Covariance == unfold.Full)
	dens := unfold.DerivedEnsembles(res.DerivedJacobians)
	for u, e := range units {
		if _, c := ReplicaRange(n, u); e.Estimate == nil || e.Estimate.N != int64(c) || e.Estimate.Len() != ens.Len() || e.Estimate.Full != ens.Full || len(e.Estimate.M2) != len(ens.M2) || len(e.Derived) != len(res.DerivedJacobians) {
			return fmt.Errorf("analysis: the ensembles of bootstrap replica unit %d are not those of replicas %d..%d of %s", u, u*ReplicaUnit, u*ReplicaUnit+c-1, a.File)
		}
		ens.Merge(e.Estimate)
		for i, d := range e.Derived {
			dens[i].Merge(d)
		}
	}
	src := unfold.EnsembleSource(unfold.SourceSimulation, unfold.MethodReplicas, ens, res.Determined)
	src.Derived = unfold.EnsembleCovariances(dens)
	res.AddSource(*src)
	res.Streams = append(res.Streams, unfold.Stream{Unit: "replica", Derivation: response.ReplicaDerivation})
	limit := s.MemoryLimit
	if limit <= 0 {
		limit = unfold.DefaultMemoryLimit
	}
	block := ReplicaBlock(out.Problem, limit)
	out.Notes = append(out.Notes, fmt.Sprintf("the bootstrap filled its %d replicas in %d pass(es) over the simulated events, %d replicas per pass (half of the memory limit)", n, (n+block-1)/block, min(block, n)))
	return nil
}
