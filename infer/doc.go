// Package infer turns records of visible transitions into statistics,
// tests and fits.
//
// Data in: ReadRecords reads CSV or TSV records (columns time, label and
// optionally record) or state traces into a likelihood.Data, with errors
// that name file, line and column.
package infer
