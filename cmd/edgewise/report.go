package main

import (
	"crypto/sha256"
	"encoding/csv"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strconv"
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
	Seed     string   `json:"seed,omitempty"` // random seed, when the command draws numbers
	Tables   []table  `json:"tables"`
	Notes    []string `json:"notes,omitempty"`
}

func checksum(b []byte) string {
	s := sha256.Sum256(b)
	return hex.EncodeToString(s[:])
}

// formats lists the output formats every report command accepts.
const formats = "table, markdown, latex, csv or json"

// write renders r in the given format: table (terminal), markdown, latex
// (booktabs), csv, json.
func (r *report) write(w io.Writer, format string) error {
	switch format {
	case "json":
		enc := json.NewEncoder(w)
		enc.SetIndent("", "  ")
		return enc.Encode(r)
	case "csv":
		// Comment lines are written raw (never quoted), so a reader that
		// skips lines starting with "#" sees only the tables; a blank line
		// separates tables.
		comment := func(s string) {
			fmt.Fprintf(w, "# %s\n", strings.NewReplacer("\n", " ", "\r", " ").Replace(s))
		}
		comment(r.stamp())
		for i, t := range r.Tables {
			if i > 0 {
				fmt.Fprintln(w)
			}
			comment(t.Title)
			cw := csv.NewWriter(w)
			cw.Write(t.Columns)
			cw.WriteAll(t.Rows)
			if err := cw.Error(); err != nil {
				return err
			}
		}
		for _, n := range r.Notes {
			comment("note: " + n)
		}
		return nil
	case "markdown":
		// "|" inside a cell (as in P(+|+)) would split the column.
		esc := strings.NewReplacer("|", `\|`).Replace
		cells := func(xs []string) string {
			out := make([]string, len(xs))
			for i, x := range xs {
				out[i] = esc(x)
			}
			return strings.Join(out, " | ")
		}
		fmt.Fprintf(w, "<!-- %s -->\n\n", r.stamp())
		for _, t := range r.Tables {
			fmt.Fprintf(w, "**%s**\n\n| %s |\n|%s\n", esc(t.Title), cells(t.Columns), strings.Repeat("---|", len(t.Columns)))
			for _, row := range t.Rows {
				fmt.Fprintf(w, "| %s |\n", cells(row))
			}
			fmt.Fprintln(w)
		}
		if len(r.Notes) > 0 {
			fmt.Fprint(w, "Notes:\n\n")
			for _, n := range r.Notes {
				fmt.Fprintf(w, "- %s\n", esc(n))
			}
		}
		return nil
	case "latex":
		return r.writeLatex(w)
	case "table", "":
		for _, t := range r.Tables {
			fmt.Fprintf(w, "%s\n", t.Title)
			tw := tablewriter.NewTable(w, tablewriter.WithHeaderAutoFormat(twopt.Off),
				tablewriter.WithRowAutoWrap(twopt.WrapNormal), tablewriter.WithRowMaxWidth(56),
				tablewriter.WithHeaderAutoWrap(twopt.WrapNormal), tablewriter.WithHeaderMaxWidth(56))
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
	return fmt.Errorf("unknown format %q (want %s)", format, formats)
}

// validFormat reports whether write accepts format.
func validFormat(format string) bool {
	switch format {
	case "table", "", "markdown", "latex", "csv", "json":
		return true
	}
	return false
}

func (r *report) stamp() string {
	// Checksum holds one sha256 per input, separated by spaces.
	var sums []string
	for _, c := range strings.Fields(r.Checksum) {
		sums = append(sums, c[:min(12, len(c))])
	}
	s := fmt.Sprintf("%s %s; input %s sha256 %s", r.Tool, r.Command, r.Input, strings.Join(sums, ", "))
	if r.Seed != "" {
		s += "; seed " + r.Seed
	}
	return s
}

// writeLatex renders each table as a booktabs table environment; numeric
// columns are right-aligned, notes become a footnote-sized paragraph.
func (r *report) writeLatex(w io.Writer) error {
	fmt.Fprintf(w, "%% %s\n%% needs \\usepackage{booktabs}\n", r.stamp())
	for _, t := range r.Tables {
		align := make([]byte, len(t.Columns))
		for j := range t.Columns {
			align[j] = 'r'
			for _, row := range t.Rows {
				if j < len(row) && !isNumber(row[j]) {
					align[j] = 'l'
					break
				}
			}
		}
		fmt.Fprintf(w, "\n\\begin{table}[htbp]\n\\centering\n\\caption{%s}\n\\begin{tabular}{%s}\n\\toprule\n", texEscape(t.Title), align)
		fmt.Fprintf(w, "%s \\\\\n\\midrule\n", texRow(t.Columns))
		for _, row := range t.Rows {
			fmt.Fprintf(w, "%s \\\\\n", texRow(row))
		}
		fmt.Fprint(w, "\\bottomrule\n\\end{tabular}\n\\end{table}\n")
	}
	if len(r.Notes) > 0 {
		fmt.Fprint(w, "\n{\\footnotesize\n")
		for _, n := range r.Notes {
			fmt.Fprintf(w, "%s\\par\n", texEscape(n))
		}
		fmt.Fprint(w, "}\n")
	}
	return nil
}

func texRow(cells []string) string {
	out := make([]string, len(cells))
	for i, c := range cells {
		out[i] = texEscape(c)
		if i == 0 && strings.HasPrefix(out[i], "[") {
			// After the previous row's \\, a "[" would be read as its
			// optional argument.
			out[i] = "{}" + out[i]
		}
	}
	return strings.Join(out, " & ")
}

// texEscape escapes the characters that LaTeX treats specially.
func texEscape(s string) string {
	return strings.NewReplacer(
		`\`, `\textbackslash{}`, "&", `\&`, "%", `\%`, "$", `\$`, "#", `\#`,
		"_", `\_`, "{", `\{`, "}", `\}`, "~", `\textasciitilde{}`, "^", `\textasciicircum{}`,
		"·", `$\cdot$`, "±", `$\pm$`, "->", `$\to$`,
		// OT1-encoded text would print these as other glyphs.
		"|", `$|$`, "<", `$<$`, ">", `$>$`,
	).Replace(s)
}

// isNumber reports whether a table cell holds a plain number.
func isNumber(s string) bool {
	_, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
	return err == nil
}

// num formats a number for tables: 5 significant digits, "+inf", "-inf",
// and "n/a" for an undefined value.
func num(x float64) string {
	switch {
	case math.IsNaN(x):
		return "n/a"
	case math.IsInf(x, 1):
		return "+inf"
	case math.IsInf(x, -1):
		return "-inf"
	}
	return strconv.FormatFloat(x+0, 'g', 5, 64) // + 0 turns -0 into 0
}
