package output

import (
	"fmt"
	"io"
	"strings"
)

// mdEscape escapes what would break a pipe table or start markup.
var mdEscape = strings.NewReplacer("|", `\|`, "*", `\*`, "_", `\_`, "<", "&lt;", "\n", " ", "\r", " ").Replace

func mdHeader(c Column) string {
	s := mdEscape(c.Label)
	if c.Unit != "" {
		s += " (" + mdEscape(c.Unit) + ")"
	}
	return s
}

func renderMarkdown(w io.Writer, r *Report) error {
	fmt.Fprintf(w, "<!-- %s -->\n\n", strings.ReplaceAll(r.Stamp.Text(r.Command, false), "--", "- -"))
	for _, t := range r.Tables {
		p := prepare(t, 0)
		fmt.Fprintf(w, "**%s**\n\n", mdEscape(t.Title))
		head := []string{mdEscape(t.RowHeader)}
		rule := []string{"---"}
		for _, j := range p.shown {
			c := t.Columns[j]
			head = append(head, mdHeader(c))
			align := "---"
			for i := range t.Rows {
				if p.cells[i][j].numeric() {
					align = "--:"
				}
			}
			rule = append(rule, align)
		}
		fmt.Fprintf(w, "| %s |\n|%s|\n", strings.Join(head, " | "), strings.Join(rule, "|"))
		for i, row := range t.Rows {
			cells := []string{mdEscape(row.Label)}
			for _, j := range p.shown {
				c := p.cells[i][j]
				s := mdEscape(c.human())
				if c.foot != "" {
					s += "<sup>" + c.foot + "</sup>"
				}
				cells = append(cells, s)
			}
			fmt.Fprintf(w, "| %s |\n", strings.Join(cells, " | "))
		}
		fmt.Fprintln(w)
		for i, f := range p.feet {
			fmt.Fprintf(w, "<sup>%s</sup> %s  \n", letter(i), mdEscape(f))
		}
		for _, n := range t.Notes {
			fmt.Fprintf(w, "- %s\n", mdEscape(n))
		}
		if len(p.feet)+len(t.Notes) > 0 {
			fmt.Fprintln(w)
		}
	}
	if len(r.Notes) > 0 {
		fmt.Fprint(w, "Notes:\n\n")
		for i, n := range r.Notes {
			fmt.Fprintf(w, "%d. %s\n", i+1, mdEscape(n))
		}
	}
	return nil
}
