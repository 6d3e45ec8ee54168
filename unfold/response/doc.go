// Package response builds responses and reco-level histograms from streamed
// events.
//
// A simulated event is located in the truth scheme if it passes the
// truth selection, and in the reco scheme if it passes the reco
// selection. Then:
//
//   - located at both levels: a migration entry (reco bin i, truth bin j,
//     weight w) of the matrix A;
//   - located at truth level only: a miss. It counts in the generated
//     spectrum G_j only, which lowers the efficiency eps_j = sum_i A_ij / G_j;
//   - located at reco level only: a fake. Its weight goes into the
//     expected background b_i and its squared weight into the
//     background's variance.
//
// G_j is the sum of the weights of every event passing the truth
// selection located in truth bin j. Flow bins are ordinary bins of the
// schemes. An event that passes a selection but falls outside a scheme
// (a flow it would need is switched off) is counted as outside at that
// level and treated as not located there: truth outside with reco
// inside is a fake, truth inside with reco outside is a miss.
//
// Purity and stability are defined on the truth binning, so that they
// also mean something when the reco binning differs: the reco
// observables of each event passing the reco selection are located in
// the TRUTH scheme as well (Simulation.RecoInTruth). With D_j the weight
// of events generated in truth bin j whose reco observables also fall in
// j, and R_j the weight of all reco-selected events whose reco
// observables fall in j, purity_j = D_j / R_j and stability_j = D_j / G_j.
// For identical truth and reco binnings these are the usual definitions
// (common practice).
//
// Events are streamed: the memory used is independent of the number of
// events (a fixed number of batches in flight, plus the distinct cells
// of the matrix). A fixed number of worker goroutines evaluate the
// observables and locate the events of whole batches. The generated
// spectrum, the fakes and the purity histograms are then summed on one
// goroutine in event order, and the migration entries go, batch by batch
// in event order, to a sparse.Accumulator, whose result depends only on
// that ordered stream. So every result is the same bits whatever the
// number of workers or the batch size.
//
// # Shards
//
// The unit of building is the shard, a fixed range of events of one
// sample (DefaultShardEvents, ShardRanges). Each shard has its own
// accumulator, histograms and counts, started empty at the shard's first
// event; the partial responses are merged in shard order (Merger, with
// sparse.Sum for the migration cells), and negative cells are decided on
// the merged response. A Builder fed every shard, and Builders fed
// ranges of shards (AddRange) whose partials are merged in shard order,
// give the same bits. A Part holds the partials of a block of shards on
// disk (Save, LoadPart); MergeParts checks that parts of one plan cover
// every shard exactly once and merges them.
//
// # Memory
//
// The memory of a build is, with B events per batch, W workers, G cores,
// n_t truth and n_r reco bins, c the distinct cells of a shard and C
// those of the merged response:
//
//	(4·W + 8)·B·(8·columns + 36) + 64·16·B    the batches in flight and their entries
//	+ sparse.AccumulatorBytes(entries, c, …)   the shard's accumulation (54 bytes per cell and its buffers)
//	+ 32·(2·n_t + n_r)                         two shard histograms (with purity; 32·(n_t + n_r) without)
//	+ MergeBytes(C, P, n_t, n_r)               the merge: 48·(C + P) + 8·(4·n_t + 2·n_r), P ≤ 16·c pending
//
// The number of events moves only the time. Builder.MemoryLimit refuses,
// with a *sparse.MemoryError, a shard's accumulation or a merge whose
// budget exceeds it.
//
// # Bootstrap replicas
//
// FillReplicas fills, in one pass over the events, a range of Poisson
// bootstrap replicas of the response on the nominal sparsity pattern:
// each event's weight times its ReplicaCount, a Poisson(1) count that is
// a pure function of (seed, sample, event, replica) (method.md §25), so
// any range of replicas, in any process, gets the same counts.
//
// The package never draws anything: a progress callback reports the
// events done. Problems with the input (a non-finite weight, a read
// error) are returned as errors naming the sample and the event;
// programmer errors (mismatched lengths) panic.
package response
