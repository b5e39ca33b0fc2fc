package main

import (
	"bytes"
	"encoding/json"
	"math"
	"testing"
)

// jReport is a report as decoded from the JSON format.
type jReport struct {
	Schema  string
	Command string
	Stamp   struct {
		Tool     string
		Command  string
		Args     []string
		Inputs   []struct{ Name, SHA256 string }
		Seed     *uint64
		TimeUnit *string `json:"time_unit"`
	}
	Tables []jTable
	Notes  []string
}

type jTable struct {
	Key, Title string
	RowHeader  string `json:"row_header"`
	Columns    []struct{ Key, Label, Unit string }
	Rows       []jRow
	Notes      []string
}

type jRow struct {
	Key, Label string
	Cells      map[string]jCell
}

type jCell struct {
	Kind                 string
	Value, Lower, Upper  *float64
	Level                *float64
	Method, Text, Reason string
	Note                 string
}

// runJSON runs a command with --format json and decodes its report.
func runJSON(t *testing.T, args ...string) *jReport {
	t.Helper()
	var out, errb bytes.Buffer
	if code := run(append(args, "--format", "json"), &out, &errb); code != 0 {
		t.Fatalf("%v: code %d: %s", args, code, errb.String())
	}
	var r jReport
	if err := json.Unmarshal(out.Bytes(), &r); err != nil {
		t.Fatalf("%v: %v", args, err)
	}
	return &r
}

// table returns the table with the given key.
func (r *jReport) table(t *testing.T, key string) *jTable {
	t.Helper()
	for i := range r.Tables {
		if r.Tables[i].Key == key {
			return &r.Tables[i]
		}
	}
	t.Fatalf("no table %q", key)
	return nil
}

// hasTable reports whether the report has the table.
func (r *jReport) hasTable(key string) bool {
	for i := range r.Tables {
		if r.Tables[i].Key == key {
			return true
		}
	}
	return false
}

// row returns a row of a table, and whether it exists.
func (tb *jTable) row(key string) (jRow, bool) {
	for _, r := range tb.Rows {
		if r.Key == key {
			return r, true
		}
	}
	return jRow{}, false
}

// cell returns a cell; it fails the test when it is missing.
func (r *jReport) cell(t *testing.T, table, row, col string) jCell {
	t.Helper()
	rw, ok := r.table(t, table).row(row)
	if !ok {
		t.Fatalf("table %s: no row %q", table, row)
	}
	c, ok := rw.Cells[col]
	if !ok {
		t.Fatalf("table %s row %s: no cell %q", table, row, col)
	}
	return c
}

// num returns the number of a cell: its value, 0 for an exact zero, +-inf
// for null with reason +inf or -inf, NaN for undefined.
func (r *jReport) num(t *testing.T, table, row, col string) float64 {
	t.Helper()
	c := r.cell(t, table, row, col)
	switch {
	case c.Kind == "zero":
		return 0
	case c.Value != nil:
		return *c.Value
	case c.Reason == "+inf":
		return math.Inf(1)
	case c.Reason == "-inf":
		return math.Inf(-1)
	case c.Kind == "undefined":
		return math.NaN()
	}
	t.Fatalf("table %s row %s col %s: not a number: %+v", table, row, col, c)
	return 0
}
