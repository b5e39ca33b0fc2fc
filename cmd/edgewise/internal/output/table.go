package output

import (
	"fmt"
	"strconv"
	"strings"
)

// Report is what a command shows: a stamp, tables and notes.
type Report struct {
	Command string // the command's name, e.g. "inspect"
	Stamp   Stamp
	Tables  []*Table
	Notes   []string // notes on the whole report, in order
}

// Stamp says where a report came from.
type Stamp struct {
	Tool     string   // tool name and version, e.g. "edgewise 0.1.0-dev"
	Args     []string // the command line after the command's name
	Inputs   []Input  // every file read, in order
	Seed     *uint64  // the random seed, when the command draws numbers
	TimeUnit TimeUnit // the time unit of the records and rates; "" when unnamed
}

// Input is one file read by a command, with the sha256 of its bytes.
type Input struct {
	Name   string `json:"name"`
	SHA256 string `json:"sha256"`
}

// SeedOf returns a pointer to seed, for Stamp.Seed.
func SeedOf(seed uint64) *uint64 { return &seed }

// Text returns the stamp on one line; short shortens each checksum to 12
// hex digits (for people), otherwise it is given in full.
func (s Stamp) Text(command string, short bool) string {
	var b strings.Builder
	b.WriteString(s.Tool + " " + command)
	for _, in := range s.Inputs {
		sum := in.SHA256
		if short && len(sum) > 12 {
			sum = sum[:12]
		}
		fmt.Fprintf(&b, "; %s sha256 %s", in.Name, sum)
	}
	if s.Seed != nil {
		b.WriteString("; seed " + strconv.FormatUint(*s.Seed, 10))
	}
	if s.TimeUnit != "" {
		b.WriteString("; time unit " + string(s.TimeUnit))
	} else {
		b.WriteString("; time in the unit of the records")
	}
	return oneLine(b.String())
}

// TimeUnit names the unit of time, e.g. "ms"; "" means the unnamed unit
// of the records, written "time" in units.
type TimeUnit string

func (u TimeUnit) name() string {
	if u == "" {
		return "time"
	}
	return string(u)
}

// Time is the unit of a duration: "ms", or "time" when unnamed.
func (u TimeUnit) Time() string { return u.name() }

// Rate is the unit of a rate: "1/ms".
func (u TimeUnit) Rate() string { return "1/" + u.name() }

// Entropy is the unit of an entropy production rate: "k_B/ms".
func (u TimeUnit) Entropy() string { return "k_B/" + u.name() }

// Column is one column of a table: a stable machine key, a human label and
// a unit ("" for none).
type Column struct {
	Key   string
	Label string
	Unit  string
	// MachineOnly columns repeat what the row label says for people (e.g.
	// a window length already in "n = 5, all windows"): CSV and JSON carry
	// them, the terminal, Markdown and LaTeX leave them out.
	MachineOnly bool
}

// Col is a Column.
func Col(key, label, unit string) Column { return Column{Key: key, Label: label, Unit: unit} }

// MachineCol is a MachineOnly Column.
func MachineCol(key, label, unit string) Column {
	return Column{Key: key, Label: label, Unit: unit, MachineOnly: true}
}

// Row is one row of a table: a stable machine key, a human label and one
// cell per column.
type Row struct {
	Key   string
	Label string
	Cells []Cell
}

// Table is one titled table. Every row has a label, shown in a first
// column headed RowHeader, and one cell per column.
type Table struct {
	Key       string // stable machine name, e.g. "labels"
	Title     string
	RowHeader string // header of the row labels, e.g. "quantity"
	Columns   []Column
	Rows      []Row
	Notes     []string // notes under the table
}

// NewTable returns an empty table with the given columns.
func NewTable(key, title, rowHeader string, cols ...Column) *Table {
	return &Table{Key: key, Title: title, RowHeader: rowHeader, Columns: cols}
}

// Add appends a row; it panics when the number of cells differs from the
// number of columns (a programming error).
func (t *Table) Add(key, label string, cells ...Cell) {
	if len(cells) != len(t.Columns) {
		panic(fmt.Sprintf("output: table %s row %s: %d cells for %d columns", t.Key, key, len(cells), len(t.Columns)))
	}
	t.Rows = append(t.Rows, Row{Key: key, Label: label, Cells: cells})
}

// Note appends a note under the table.
func (t *Table) Note(format string, a ...any) {
	t.Notes = append(t.Notes, fmt.Sprintf(format, a...))
}

// Cell returns the cell of row key and column key, and whether it exists.
func (t *Table) Cell(row, col string) (Cell, bool) {
	j := -1
	for i, c := range t.Columns {
		if c.Key == col {
			j = i
		}
	}
	if j < 0 {
		return Cell{}, false
	}
	for _, r := range t.Rows {
		if r.Key == row {
			return r.Cells[j], true
		}
	}
	return Cell{}, false
}

// Table returns the report's table with the given key, or nil.
func (r *Report) Table(key string) *Table {
	for _, t := range r.Tables {
		if t.Key == key {
			return t
		}
	}
	return nil
}

// Add appends tables to the report.
func (r *Report) Add(t ...*Table) { r.Tables = append(r.Tables, t...) }

// Note appends a note on the whole report.
func (r *Report) Note(format string, a ...any) {
	r.Notes = append(r.Notes, fmt.Sprintf(format, a...))
}

// Key turns a label into a machine key: letters, digits and underscores,
// with "+" written plus and a "-" that is not a hyphen inside a word
// written minus, e.g. Key("P(+|+)") = "P_plus_plus", Key("post-selected")
// = "post_selected".
func Key(label string) string {
	var b strings.Builder
	under := false
	rs := []rune(label)
	alnum := func(i int) bool {
		if i < 0 || i >= len(rs) {
			return false
		}
		r := rs[i]
		return r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9'
	}
	put := func(s string) {
		if b.Len() > 0 && !under {
			b.WriteByte('_')
		}
		b.WriteString(s)
		under = false
	}
	for i, r := range rs {
		switch {
		case r >= 'a' && r <= 'z', r >= 'A' && r <= 'Z', r >= '0' && r <= '9':
			b.WriteRune(r)
			under = false
		case r == '+':
			put("plus")
		case r == '-' && !(alnum(i-1) && alnum(i+1)):
			put("minus")
		default:
			if b.Len() > 0 && !under {
				b.WriteByte('_')
				under = true
			}
		}
	}
	return strings.TrimSuffix(b.String(), "_")
}
