// Package events reads and writes event samples: tables with one row per
// event and one numeric column per variable (truth and reconstructed values,
// weights, selection flags).
//
// Three formats share one interface, [Source]:
//
//   - ROOT files (.root): a TTree (or TNtuple) of scalar branches of type
//     bool, int8 to int64, uint8 to uint64, float32 (also Float16_t) or
//     float64 (also Double32_t), read with go-hep.org/x/hep/groot. Each
//     branch's type is checked before it is bound (binding a branch to a
//     variable of another type panics inside groot), and every value is
//     converted to float64. Array and variable-length branches are reported
//     as unsupported. Several goroutines decode separate entry ranges (see
//     Options.Workers); batches still arrive in file order.
//   - Parquet files (.parquet, .parq, .pq): flat columns of physical type
//     DOUBLE, FLOAT, INT32, INT64 or BOOLEAN, required or optional without
//     nulls, plain, delta or dictionary encoded, converted page by page
//     straight into the batch buffers. LZ4-compressed columns are refused:
//     parquet-go v0.32.0 reads wrong values back from them.
//   - CSV files (.csv): a header line with the column names, then one event
//     per line; numbers as accepted by strconv.ParseFloat, plus true/false.
//
// Reading is streamed: [Source.Read] calls a function with batches of at
// most batchSize events, in file order, reusing the batch buffers between
// calls, so memory does not grow with the number of events.
//
// [WriteROOT], [WriteParquet] and [WriteCSV] write float64 columns. Each
// writes a temporary file in the destination folder and renames it into
// place, so a failed write leaves no partial file.
//
// # Errors and panics
//
// Problems with files (missing, truncated, unknown column or branch, a value
// that is not a number) are returned as errors naming the file, the column
// or branch, and for CSV the line and column. Functions panic only for
// programmer errors, such as a non-positive batch size.
package events
