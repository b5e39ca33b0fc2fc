package main

import (
	"fmt"
	"math"

	"edgewise/cmd/edgewise/internal/output"
	"edgewise/infer"
)

// estimate columns: value, SE and interval in one unit, then the method
// and a note.
func estimateCols(level float64, unit string) []output.Column {
	return []output.Column{
		output.Col("value", "value", unit), output.Col("se", "SE", unit),
		output.Col("interval", pct(level)+" interval", unit),
		output.Col("method", "method", ""), output.Col("note", "note", ""),
	}
}

// estimateCells returns the cells of estimateCols for e: an undefined
// estimate is one undefined value whose reason is e's note.
func estimateCells(e infer.Estimate, level float64) []output.Cell {
	if e.Undefined || math.IsNaN(e.Value) {
		why := e.Note
		if why == "" {
			why = "undefined"
		}
		return []output.Cell{output.Undefined(why), output.Empty(), output.Empty(), text(e.Method), output.Empty()}
	}
	return []output.Cell{output.Num(e.Value), output.Num(e.SE), output.Interval(e.Lo, e.Hi, level, e.Method), text(e.Method), text(e.Note)}
}

// estimateUnitCols are estimateCols with a unit column, for tables whose
// rows have different units.
func estimateUnitCols(level float64) []output.Column {
	return append([]output.Column{output.Col("unit", "unit", "")}, estimateCols(level, "")...)
}

func estimateUnitCells(unit string, e infer.Estimate, level float64) []output.Cell {
	return append([]output.Cell{text(unit)}, estimateCells(e, level)...)
}

// text is a text cell, or an empty one for "".
func text(s string) output.Cell {
	if s == "" {
		return output.Empty()
	}
	return output.Text(s)
}

// pct writes a level as a percentage: 0.95 -> "95%".
func pct(level float64) string { return fmt.Sprintf("%g%%", 100*level) }

// pval writes a p-value for a sentence.
func pval(p float64) string {
	if math.IsNaN(p) {
		return "n/a"
	}
	if p < 1e-300 && p >= 0 {
		return "< 1e-300"
	}
	return fmt.Sprintf("%.3g", p)
}

// num writes a number for a sentence or label (5 significant digits).
func num(x float64) string {
	switch {
	case math.IsNaN(x):
		return "n/a"
	case math.IsInf(x, 1):
		return "+inf"
	case math.IsInf(x, -1):
		return "-inf"
	}
	return fmt.Sprintf("%.5g", x+0)
}
