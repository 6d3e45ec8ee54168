// Package batch splits an ensemble of independent unfoldings into shards
// that separate processes or machines run, and merges their partial
// results into exactly what one process computes.
//
// # Plans
//
// A Plan, written as plan.json in a work folder, names the analysis
// file and the assembled problem by content hash (SHA-256 of the file,
// and of the response, generated counts, data and background as
// assembled: ProblemSum), the settings of the ensemble, the work units
// and their assignment to shards. A unit of a toy ensemble is a block of
// validate.BlockToys consecutive toys; toy t draws from the PCG stream
// (seed, validate.ToyStream(t)), recorded per unit, so no unit depends
// on the shard, the process or the machine that runs it. A shard is a
// contiguous run of units. A response plan (ResponsePlan) names the
// analysis file only: its shard I is part I of the response (a block of
// the response shards, response.PartShards), written as the part folder
// parts/part-NNNNN, and MergeResponse merges the parts in shard order
// (response.MergeParts) into the response of one build, bit for bit.
// A variations plan (VariationPlan) has one unit per systematic
// variation of the analysis (an up/down pair is one unit) and names
// every input file of the analysis by content (Plan.Inputs, checked with
// CheckFiles). RunVariations unfolds the variations of a shard against
// the nominal unfolding of the analysis (analysis.Nominal) and writes
// their varied estimates, as numbers that read back to the same bits;
// MergeVariations returns them in the analysis's order for
// analysis.Nominal.Finish, which writes the result folder of one run.
// A replicas plan (ReplicaPlan) has one unit per analysis.ReplicaUnit
// bootstrap replicas; RunReplicas writes the ensemble of each unit of a
// shard, exactly, and MergeReplicas returns them in unit order, which
// Finish merges as one run does.
//
// The members of a plan (Plan.Members) are its toys, variations or
// replicas; MaxShards bounds its shards (a shard holds at least one
// unit), every kind's shards split its units in the same balanced way,
// and Plan.MemberRange says which members a shard holds.
//
// # Shards
//
// RunShard runs one shard and writes its partial result (the mergeable
// moments of its toys, validate.Ensemble) as shards/shard-NNNNN.json in
// the work folder, atomically: a shard file is complete or absent, so a
// failed or interrupted shard leaves nothing that Merge would take.
// Running a shard whose file exists and belongs to the plan does
// nothing. Each file carries the plan's identity (the SHA-256 of
// plan.json) and its shard number. RunVariations and RunReplicas write
// their shards' files the same way, through one path that checks the
// head of a file (format, plan, shard) once and leaves to each kind only
// what its file holds.
//
// Merge checks that every shard of the plan is present and belongs to
// it, and merges their blocks in toy order; the moments are those of one
// run over every toy, bit for bit (see validate.Merge). MergeVariations
// and MergeReplicas check the same and return their shards' contents in
// order. Status reports the shards done, missing and foreign from the
// shard files (or the response parts) alone, and ShardDone one shard.
//
// # Slurm
//
// Arrays splits the shards to submit into job arrays whose indices stay
// below a cluster's MaxArraySize (MaxArraySize reads it from the output
// of the cluster's configuration query), each with an offset added to
// the array task index, and Array.Spec writes an array's index list.
package batch
