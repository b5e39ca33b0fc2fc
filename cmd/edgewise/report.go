package main

import (
	"crypto/sha256"
	"encoding/csv"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
	"strings"

	"github.com/olekukonko/tablewriter"
	twopt "github.com/olekukonko/tablewriter/tw"
)

// table is one titled table of a report.
type table struct {
	Title   string     `json:"title"`
	Columns []string   `json:"columns"`
	Rows    [][]string `json:"rows"`
}

// report is what a subcommand shows: tables, notes and a stamp.
type report struct {
	Tool     string   `json:"tool"`
	Command  string   `json:"command"`
	Input    string   `json:"input"`
	Checksum string   `json:"input_sha256"`
	Tables   []table  `json:"tables"`
	Notes    []string `json:"notes,omitempty"`
}

func checksum(b []byte) string {
	s := sha256.Sum256(b)
	return hex.EncodeToString(s[:])
}

// write renders r in the given format: table (terminal), markdown, csv, json.
func (r *report) write(w io.Writer, format string) error {
	switch format {
	case "json":
		enc := json.NewEncoder(w)
		enc.SetIndent("", "  ")
		return enc.Encode(r)
	case "csv":
		cw := csv.NewWriter(w)
		cw.Write([]string{"# " + r.stamp()})
		for _, t := range r.Tables {
			cw.Write([]string{"# " + t.Title})
			cw.Write(t.Columns)
			cw.WriteAll(t.Rows)
		}
		cw.Flush()
		return cw.Error()
	case "markdown":
		fmt.Fprintf(w, "<!-- %s -->\n\n", r.stamp())
		for _, t := range r.Tables {
			fmt.Fprintf(w, "**%s**\n\n| %s |\n|%s\n", t.Title, strings.Join(t.Columns, " | "), strings.Repeat("---|", len(t.Columns)))
			for _, row := range t.Rows {
				fmt.Fprintf(w, "| %s |\n", strings.Join(row, " | "))
			}
			fmt.Fprintln(w)
		}
		for _, n := range r.Notes {
			fmt.Fprintf(w, "> %s\n", n)
		}
		return nil
	case "table", "":
		for _, t := range r.Tables {
			fmt.Fprintf(w, "%s\n", t.Title)
			tw := tablewriter.NewTable(w, tablewriter.WithHeaderAutoFormat(twopt.Off))
			h := make([]any, len(t.Columns))
			for i, c := range t.Columns {
				h[i] = c
			}
			tw.Header(h...)
			for _, row := range t.Rows {
				if err := tw.Append(row); err != nil {
					return err
				}
			}
			if err := tw.Render(); err != nil {
				return err
			}
			fmt.Fprintln(w)
		}
		for _, n := range r.Notes {
			fmt.Fprintf(w, "note: %s\n", n)
		}
		fmt.Fprintf(w, "(%s)\n", r.stamp())
		return nil
	}
	return fmt.Errorf("unknown format %q (want table, markdown, csv or json)", format)
}

func (r *report) stamp() string {
	return fmt.Sprintf("%s %s; input %s sha256 %s", r.Tool, r.Command, r.Input, r.Checksum[:12])
}
