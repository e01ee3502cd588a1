// Package report turns a finished campaign into what quality engineers
// read and archive: an Office Open XML workbook with native charts, CSV and
// JSON-lines exports of results and readings, and PNG plots.
//
// # Place in the flow
//
// plan → procedure → readings → fit → results → report. The package has
// its own flat input model (Campaign and its rows, model.go) and imports no
// other nullbench package; the command maps procedure and fit results into
// it. Report presents and does not recompute physics: the only derived
// numbers are for presentation (drift-corrected output change and fit
// residuals for the charts, histogram bin counts, verdict counts, margins
// to the limit, shares of variance in a budget).
//
// # Workbook
//
// WriteWorkbook writes sheets with plain names (Summary, Units, Results,
// Uncertainty, Fits, Readings, Lot, Consistency, Board, Temperature,
// Charts, Chart data). Every table has its unit in the header, a number
// format per quantity (dB "0.00", µV/V engineering "##0.000E+0", volts
// scientific, times yyyy-mm-ddThh:mm:ss.000 UTC), a frozen header row and a
// filterable table. Tabular sheets are written with excelize's stream
// writer, so a campaign of a quarter of a million readings stays within a
// modest heap (see BenchmarkWorkbookLargeCampaign).
//
// Verdict cells carry a text mark (PASS, COND. PASS, COND. FAIL, FAIL) and
// a fill that differs in lightness and pattern, not hue alone, so they read
// for colour-blind readers and on greyscale prints (palette in styles.go).
//
// # Text safety
//
// Text that came from users or instruments (unit ids, serials, notes,
// operator, *IDN? strings) is always written as a string cell, never as a
// formula, even when it starts with '=', '+', '-' or '@'. Chart series
// names are references to cells holding the text, because excelize writes
// a series name as a formula. The CSV writers can optionally prefix such
// text with an apostrophe for spreadsheet users (CSVOptions.GuardFormulas).
//
// # Standards
//
// Decision zones after ILAC-G8:09/2019 §4.2; uncertainty terms after GUM
// (JCGM 100:2008); CSV after RFC 4180; times after ISO 8601 / RFC 3339;
// built-in number formats after ECMA-376 Part 1 §18.8.30.
package report
