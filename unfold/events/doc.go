// Package events reads and writes event samples: tables with one row per
// event and one numeric column per variable (truth and reconstructed values,
// weights, selection flags).
//
// Three formats share one interface, [Source]:
//
//   - ROOT files (.root): a TTree of scalar branches of type bool, int8 to
//     int64, uint8 to uint64, float32 (also Float16_t) or float64 (also
//     Double32_t), read with go-hep.org/x/hep/groot. Each branch's type is
//     checked before it is bound, and every value is converted to float64.
//     Array and variable-length branches are reported as unsupported.
//   - Parquet files (.parquet, .parq, .pq): flat columns of physical type
//     DOUBLE, FLOAT, INT32, INT64 or BOOLEAN, required or optional without
//     nulls, plain or dictionary encoded, read page by page straight into the
//     batch buffers.
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
