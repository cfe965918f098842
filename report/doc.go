// Package report writes what goes out of Tessera: the tidy result tables
// (estimates, contrasts, subject_contrasts, diagnostics, one design table per
// run), the Markdown report and provenance.json.
//
// Every table is written to a temporary name in the output folder and renamed
// into place only when all tables are complete (see Output), so a table is
// either whole or absent. The column definitions in Tables are the single
// source for the writers and for the codebook in the README.
package report
