// Package output is the output layer of the edgewise command: typed cells,
// tables with stable machine keys, a provenance stamp, renderers for a
// terminal, Markdown, LaTeX, tidy CSV and JSON, and a safe file writer.
//
// A command builds a Report: tables of rows, each row keyed by a stable
// machine name (F, P_plus_plus, J, ...) beside its human label, each
// column keyed too (value, se, interval, ...) with a human label and a
// unit. Cells are typed, so that every format shows the same value its
// own way:
//
//	Num(x)            a real number: 5 significant digits for people, the
//	                  shortest decimal that round-trips a float64 for machines
//	Count(n)          an integer count
//	P(p)              a p-value: 3 significant digits, "< 1e-300" below that
//	Fixed(x, d)       a number shown to d decimals (log-likelihoods, AIC and
//	                  BIC to 0.01 absolute); machines get every digit
//	Interval(lo, hi, level, method)
//	                  a confidence interval; machines get lower, upper, level
//	                  and method as separate fields
//	Text(s)           words; long ones move to numbered notes in a terminal
//	Undefined(why)    no value, with the reason (JSON null + reason, CSV nan)
//	Zero()            an exact 0 where the quantity is zero by construction
//	                  (ZeroIf turns round-off such as -3.9e-17 into it)
//
// Any cell may carry a footnote (WithNote); footnotes are lettered a, b, ...
// under their table and deduplicated.
//
// Formats (Render):
//
//   - Terminal: fits the given width (COLUMNS, or 100 columns when the
//     output is not a terminal): text longer than a cell allows moves to
//     numbered notes, and a table too wide for the width splits into parts
//     that repeat the row labels. Few rules, units in the headers.
//   - Markdown: pipe tables with the units in the headers.
//   - LaTeX: booktabs rules, siunitx S columns for numbers, threeparttable
//     notes; needs \usepackage{booktabs,siunitx,threeparttable}.
//   - CSV: one tidy long table per file, one line per cell, with a column
//     naming the table; the stamp is the first line, a comment that
//     pandas.read_csv(comment="#") and R's read.csv(comment.char="#") skip.
//     Infinities and undefined values are written inf, -inf and nan.
//   - JSON: one document per report (schema documented under docs/schema);
//     numbers are JSON numbers, infinities and undefined values are null
//     with a reason.
//
// Files (Files) are written atomically (temporary file and rename), never
// over an existing file without force, every write, flush and close error is
// returned; devices and FIFOs are written in place, symbolic links are
// written through, two outputs to one file are refused before any work,
// and an interrupt (SIGINT, SIGTERM) removes the temporary files.
package output
