package output

import (
	"fmt"
	"io"
	"strconv"
	"strings"
)

// CSVHeader is the header of the tidy CSV format: one line per cell.
//
//	table         the table's machine key ("notes" for the report's notes)
//	row           the row's machine key
//	row_label     the row's human label
//	column        the column's machine key
//	column_label  the column's human label
//	unit          the column's unit ("" for none)
//	kind          the cell kind: number, count, p, fixed, interval, text,
//	              undefined or zero
//	value         the number (shortest round-trip decimal, inf, -inf, nan)
//	lower, upper  an interval's bounds
//	level, method an interval's level and method
//	text          a text cell's words
//	reason        why a value is undefined or infinite
//	note          the cell's footnote
var CSVHeader = []string{"table", "row", "row_label", "column", "column_label", "unit", "kind", "value", "lower", "upper", "level", "method", "text", "reason", "note"}

// csvField quotes a field when it holds a separator, a quote, a line
// break, a "#" (which a reader skipping comments would cut at) or edge
// spaces.
func csvField(s string) string {
	if s == "" || !strings.ContainsAny(s, ",\"\r\n#") && strings.TrimSpace(s) == s {
		return s
	}
	return `"` + strings.ReplaceAll(s, `"`, `""`) + `"`
}

func csvLine(w io.Writer, fields []string) {
	for i, f := range fields {
		if i > 0 {
			io.WriteString(w, ",")
		}
		io.WriteString(w, csvField(f))
	}
	io.WriteString(w, "\n")
}

// infReason is the reason given beside an infinite value.
func infReason(x float64) string {
	if x > 0 {
		return "+inf"
	}
	return "-inf"
}

// csvCell returns the fields kind, value, lower, upper, level, method,
// text, reason of a cell.
func csvCell(c Cell) []string {
	f := make([]string, 8)
	f[0] = c.Kind.String()
	switch c.Kind {
	case KindNumber, KindCount, KindP, KindFixed:
		f[1] = machine(c.Value)
		if c.Kind == KindCount {
			f[1] = strconv.FormatFloat(c.Value, 'f', 0, 64)
		}
		if c.Value-c.Value != 0 { // infinite
			f[7] = infReason(c.Value)
		}
	case KindZero:
		f[1] = "0"
	case KindInterval:
		f[2], f[3], f[4], f[5] = machine(c.Lo), machine(c.Hi), machine(c.Level), c.Method
		var why []string
		if c.Lo-c.Lo != 0 {
			why = append(why, "lower "+machine(c.Lo))
		}
		if c.Hi-c.Hi != 0 {
			why = append(why, "upper "+machine(c.Hi))
		}
		f[7] = strings.Join(why, ", ")
	case KindUndefined:
		f[1], f[7] = "nan", c.Text
	case KindText:
		f[6] = oneLine(c.Text)
	}
	return f
}

func renderCSV(w io.Writer, r *Report) error {
	fmt.Fprintf(w, "# %s\n", r.Stamp.Text(r.Command, false))
	csvLine(w, CSVHeader)
	for _, t := range r.Tables {
		for _, row := range t.Rows {
			for j, c := range row.Cells {
				if c.Kind == KindEmpty {
					continue
				}
				col := t.Columns[j]
				fields := append([]string{t.Key, row.Key, oneLine(row.Label), col.Key, col.Label, col.Unit}, csvCell(c)...)
				csvLine(w, append(fields, oneLine(c.Note)))
			}
		}
		for i, n := range t.Notes {
			csvLine(w, []string{t.Key, fmt.Sprintf("note_%d", i+1), "", "note", "note", "", "text", "", "", "", "", "", oneLine(n), "", ""})
		}
	}
	for i, n := range r.Notes {
		csvLine(w, []string{"notes", fmt.Sprintf("note_%d", i+1), "", "note", "note", "", "text", "", "", "", "", "", oneLine(n), "", ""})
	}
	return nil
}
