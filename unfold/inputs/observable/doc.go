// Package observable compiles observable expressions such as
// "sqrt(px*px+py*py)" or "pass_reco && pt_reco > 20" over named input
// columns into evaluators that are built once and then run over batches of
// events.
//
// # Language
//
// Expressions use Go's expression syntax and are parsed with go/parser.
// Every value is a float64; integer literals are floats (1/2 is 0.5).
//
//   - numeric literals: 20, 1.5, 2e-3, 0x10, 1_000
//   - column names: any Go identifier among the columns given to Compile;
//     col("jet.pt") names any other column
//   - the constant pi (a column named pi takes precedence)
//   - arithmetic: + - * / and % (math.Mod: the result has the sign of the
//     dividend), unary - and +, parentheses
//   - comparisons: == != < <= > >=, giving 1 or 0 (IEEE rules: any comparison
//     with NaN is false except !=)
//   - logic: && || !, where a value is true when it is neither zero nor NaN
//     (so a missing value marked NaN fails a selection); the result is 1 or
//     0. Both operands are always evaluated (there are no side effects to
//     skip).
//   - functions: see [Functions].
//
// Operator precedence is Go's: * / % bind tighter than + -, which bind tighter
// than comparisons, then &&, then ||.
//
// # Evaluation
//
// [Expr.Eval] is the fast path: it computes one output per row over a batch
// of column-major inputs, node by node in tight loops over chunks of
// [ChunkSize] rows that stay in the L1 cache. [Expr.EvalRow] evaluates a
// single row through a tree of closures.
//
// An Expr holds scratch buffers, so it is not safe for concurrent use; give
// each goroutine its own copy with [Expr.Clone], which is cheap.
//
// # Errors and panics
//
// Compile returns an *[Error] for every problem in the expression text: a
// syntax error, an unknown column or function, a wrong number of arguments or
// an unsupported construct. The error gives the 1-based column of the
// offending token inside the expression. Eval and EvalRow panic only for
// programmer errors: input slices shorter than dst, or a row shorter than the
// column list.
package observable
