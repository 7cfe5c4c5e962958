// Package export writes a study's records and results as an XLSX workbook
// for the program office and as CSV files, and reads older data back in
// (see import.go).
//
// A workbook is a list of Sheets. Each sheet has a fixed column order,
// typed cells (numbers stay numbers, times become date cells) and rows
// that are produced one at a time, so the large sheets (captures,
// individuals) stream through excelize's StreamWriter and memory stays
// flat however large the study. The package reads results; it never
// computes a statistic itself.
//
// Text cells that a spreadsheet would take for a formula (starting with
// = + - @, or a tab or carriage return) are written with a leading
// apostrophe so that opening an export never runs anything.
package export
