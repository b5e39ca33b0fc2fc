package output

import (
	"fmt"
	"io"
	"math"
	"strings"
)

// LaTeXPreamble lists the packages the LaTeX format needs.
const LaTeXPreamble = `\usepackage{booktabs,siunitx,threeparttable}`

// latexWidth is the width, in characters of \small text, that a LaTeX
// table may take before it splits into parts: about a page column.
const latexWidth = 72

// TexEscape escapes the characters LaTeX treats specially and writes the
// few non-ASCII symbols the tables use in math mode.
var TexEscape = strings.NewReplacer(
	`\`, `\textbackslash{}`, "&", `\&`, "%", `\%`, "$", `\$`, "#", `\#`,
	"_", `\_`, "{", `\{`, "}", `\}`, "~", `\textasciitilde{}`, "^", `\textasciicircum{}`,
	"·", `$\cdot$`, "±", `$\pm$`, "->", `$\to$`, "→", `$\to$`, "≤", `$\le$`, "≥", `$\ge$`,
	"σ", `$\sigma$`, "ψ", `$\psi$`, "−", `$-$`, "×", `$\times$`,
	// OT1-encoded text would print these as other glyphs.
	"|", `$|$`, "<", `$<$`, ">", `$>$`, `"`, `''`,
).Replace

// texUnit writes a unit: k_BT and k_B as symbols, the rest escaped.
func texUnit(u string) string {
	u = strings.ReplaceAll(u, "k_BT", "\x00T")
	u = strings.ReplaceAll(u, "k_B", "\x00")
	return strings.ReplaceAll(TexEscape(u), "\x00", `$k_\mathrm{B}$`)
}

// sNumber returns the siunitx form of a number cell and whether it is a
// plain number that an S column can align.
func sNumber(c Cell) (string, bool) {
	switch c.Kind {
	case KindZero:
		return "0", true
	case KindUndefined:
		return "{--}", false
	case KindNumber, KindCount, KindFixed, KindP:
		switch {
		case math.IsInf(c.Value, 1):
			return `{$\infty$}`, false
		case math.IsInf(c.Value, -1):
			return `{$-\infty$}`, false
		case c.Kind == KindP && c.Value < 1e-300:
			return `{$<10^{-300}$}`, false
		}
		return c.human(), true
	}
	return "", false
}

// tableFormat returns siunitx's table-format for the plain numbers of an
// S column, e.g. "-1.4e-2".
func tableFormat(nums []string) string {
	neg, expNeg, exp := false, false, false
	ints, fracs, exps := 1, 0, 0
	for _, s := range nums {
		if strings.HasPrefix(s, "-") {
			neg = true
			s = s[1:]
		}
		m, e, hasE := strings.Cut(s, "e")
		if hasE {
			exp = true
			if strings.HasPrefix(e, "-") {
				expNeg = true
			}
			exps = max(exps, len(strings.TrimLeft(e, "+-")))
		}
		i, f, _ := strings.Cut(m, ".")
		ints, fracs = max(ints, len(i)), max(fracs, len(f))
	}
	s := ""
	if neg {
		s = "-"
	}
	s += fmt.Sprint(ints)
	if fracs > 0 {
		s += fmt.Sprintf(".%d", fracs)
	}
	if exp {
		s += "e"
		if expNeg {
			s += "-"
		}
		s += fmt.Sprint(exps)
	}
	return s
}

// texCell writes a prepared cell for column kind s (an S column or not).
func texCell(c prepCell, s bool) string {
	var out string
	switch {
	case c.moved > 0:
		out = fmt.Sprintf("[%d]", c.moved)
	case c.Kind == KindInterval:
		b := func(x float64) string {
			switch {
			case math.IsInf(x, 1):
				return `$\infty$`
			case math.IsInf(x, -1):
				return `$-\infty$`
			}
			return `\num{` + formatG(x, 5) + `}`
		}
		out = "[" + b(c.Lo) + ", " + b(c.Hi) + "]"
	case c.numeric():
		n, plain := sNumber(c.Cell)
		if !s {
			n = strings.TrimSuffix(strings.TrimPrefix(n, "{"), "}")
			if plain {
				n = `\num{` + n + `}`
			}
		}
		out = n
	default:
		out = TexEscape(c.human())
	}
	if c.foot != "" {
		out += `\tnote{` + c.foot + `}`
		if s && !strings.HasPrefix(out, "{") {
			out = "{" + out + "}"
		}
	}
	if strings.HasPrefix(out, "[") {
		// After the previous row's \\, a "[" would be read as its
		// optional argument.
		out = "{}" + out
	}
	return out
}

func renderLaTeX(w io.Writer, r *Report) error {
	fmt.Fprintf(w, "%% %s\n%% needs %s\n", r.Stamp.Text(r.Command, false), LaTeXPreamble)
	for _, t := range r.Tables {
		writeLaTeXTable(w, t)
	}
	if len(r.Notes) > 0 {
		fmt.Fprint(w, "\n\\begin{enumerate}\\footnotesize\n")
		for _, n := range r.Notes {
			fmt.Fprintf(w, "\\item %s\n", TexEscape(oneLine(n)))
		}
		fmt.Fprint(w, "\\end{enumerate}\n")
	}
	return nil
}

func writeLaTeXTable(w io.Writer, t *Table) {
	p := prepare(t, 30)
	n := len(t.Columns)
	// Column kinds and widths (in characters, for splitting).
	sCol := make([]bool, n)
	format := make([]string, n)
	cw := make([]int, n)
	for j, c := range t.Columns {
		var nums []string
		sCol[j] = true
		any := false
		for i := range t.Rows {
			pc := p.cells[i][j]
			if pc.Kind == KindEmpty {
				continue
			}
			any = true
			if pc.moved > 0 || !pc.numeric() || pc.Kind == KindInterval {
				sCol[j] = false
			} else if s, plain := sNumber(pc.Cell); plain {
				nums = append(nums, s)
			}
			cw[j] = max(cw[j], width(pc.human()))
		}
		sCol[j] = sCol[j] && any && len(nums) > 0
		if sCol[j] {
			format[j] = tableFormat(nums)
		}
		cw[j] = max(cw[j], min(width(c.Label), 14), width(c.Unit)+2)
	}
	lw := width(t.RowHeader)
	for _, r := range t.Rows {
		lw = max(lw, width(r.Label))
	}
	lw = min(lw, 30)
	var parts [][]int
	var cur []int
	used := lw
	for _, j := range p.shown {
		if len(cur) > 0 && used+2+cw[j] > latexWidth {
			parts = append(parts, cur)
			cur, used = nil, lw
		}
		cur = append(cur, j)
		used += 2 + cw[j]
	}
	if len(cur) > 0 || n == 0 {
		parts = append(parts, cur)
	}
	for k, part := range parts {
		title := t.Title
		if len(parts) > 1 {
			title += fmt.Sprintf(" (part %d of %d)", k+1, len(parts))
		}
		spec := []string{"l"}
		units := false
		for _, j := range part {
			if sCol[j] {
				spec = append(spec, "S[table-format="+format[j]+"]")
			} else {
				spec = append(spec, "l")
			}
			units = units || t.Columns[j].Unit != ""
		}
		fmt.Fprintf(w, "\n\\begin{table}[htbp]\n\\centering\\small\n\\begin{threeparttable}\n\\caption{%s}\n\\begin{tabular}{%s}\n\\toprule\n", TexEscape(title), strings.Join(spec, " "))
		head := []string{TexEscape(t.RowHeader)}
		unit := []string{""}
		for _, j := range part {
			head = append(head, "{"+TexEscape(t.Columns[j].Label)+"}")
			u := ""
			if t.Columns[j].Unit != "" {
				u = "{(" + texUnit(t.Columns[j].Unit) + ")}"
			}
			unit = append(unit, u)
		}
		fmt.Fprintf(w, "%s \\\\\n", strings.Join(head, " & "))
		if units {
			fmt.Fprintf(w, "%s \\\\\n", strings.Join(unit, " & "))
		}
		fmt.Fprint(w, "\\midrule\n")
		for i, row := range t.Rows {
			cells := []string{TexEscape(row.Label)}
			if strings.HasPrefix(cells[0], "[") {
				cells[0] = "{}" + cells[0]
			}
			for _, j := range part {
				cells = append(cells, texCell(p.cells[i][j], sCol[j]))
			}
			fmt.Fprintf(w, "%s \\\\\n", strings.Join(cells, " & "))
		}
		fmt.Fprint(w, "\\bottomrule\n\\end{tabular}\n")
		if k == len(parts)-1 && len(p.feet)+len(p.moved)+len(t.Notes) > 0 {
			fmt.Fprint(w, "\\begin{tablenotes}\\footnotesize\n")
			for i, f := range p.feet {
				fmt.Fprintf(w, "\\item[%s] %s\n", letter(i), TexEscape(f))
			}
			for i, m := range p.moved {
				fmt.Fprintf(w, "\\item[{[%d]}] %s\n", i+1, TexEscape(m))
			}
			for _, n := range t.Notes {
				fmt.Fprintf(w, "\\item %s\n", TexEscape(oneLine(n)))
			}
			fmt.Fprint(w, "\\end{tablenotes}\n")
		}
		fmt.Fprint(w, "\\end{threeparttable}\n\\end{table}\n")
	}
}
