package output

import (
	"bufio"
	"fmt"
	"io"
	"strings"
	"unicode/utf8"
)

// Format is an output format.
type Format string

// The formats Render writes.
const (
	Terminal Format = "table"
	Markdown Format = "markdown"
	LaTeX    Format = "latex"
	CSV      Format = "csv"
	JSON     Format = "json"
)

// Formats lists the formats for help texts.
const Formats = "table, markdown, latex, csv or json"

// ParseFormat returns the format named s ("" is Terminal).
func ParseFormat(s string) (Format, error) {
	switch f := Format(s); f {
	case "":
		return Terminal, nil
	case Terminal, Markdown, LaTeX, CSV, JSON:
		return f, nil
	}
	return "", fmt.Errorf("unknown format %q (want %s)", s, Formats)
}

// DefaultWidth is the width of terminal tables when the output is not a
// terminal and COLUMNS is not set.
const DefaultWidth = 100

// Options tune rendering.
type Options struct {
	// Width is the number of columns terminal tables must fit (0:
	// DefaultWidth). Tables wider than that split into parts.
	Width int
}

// Render writes r to w in format f. Every write error is returned: the
// output goes through a buffer whose first error sticks and is returned by
// its final flush.
func Render(w io.Writer, r *Report, f Format, opt Options) error {
	bw := bufio.NewWriter(w)
	var err error
	switch f {
	case Terminal, "":
		err = renderTerminal(bw, r, opt)
	case Markdown:
		err = renderMarkdown(bw, r)
	case LaTeX:
		err = renderLaTeX(bw, r)
	case CSV:
		err = renderCSV(bw, r)
	case JSON:
		err = renderJSON(bw, r)
	default:
		return fmt.Errorf("unknown format %q (want %s)", f, Formats)
	}
	if err != nil {
		return err
	}
	return bw.Flush()
}

// width returns the number of runes of s (every character the renderers
// use takes one terminal column).
func width(s string) int { return utf8.RuneCountInString(s) }

func pad(s string, w int, right bool) string {
	n := w - width(s)
	if n <= 0 {
		return s
	}
	if right {
		return strings.Repeat(" ", n) + s
	}
	return s + strings.Repeat(" ", n)
}

// superscripts are the footnote markers of the terminal format.
var superscripts = map[rune]rune{'a': 'ᵃ', 'b': 'ᵇ', 'c': 'ᶜ', 'd': 'ᵈ', 'e': 'ᵉ', 'f': 'ᶠ', 'g': 'ᵍ', 'h': 'ʰ', 'i': 'ⁱ', 'j': 'ʲ', 'k': 'ᵏ', 'l': 'ˡ', 'm': 'ᵐ', 'n': 'ⁿ', 'o': 'ᵒ', 'p': 'ᵖ', 'r': 'ʳ', 's': 'ˢ', 't': 'ᵗ', 'u': 'ᵘ', 'v': 'ᵛ', 'w': 'ʷ', 'x': 'ˣ', 'y': 'ʸ', 'z': 'ᶻ'}

// superscript writes a footnote letter as superscript characters, or as
// "^q" for a letter without one.
func superscript(l string) string {
	var b strings.Builder
	for _, r := range l {
		s, ok := superscripts[r]
		if !ok {
			return "^" + l
		}
		b.WriteRune(s)
	}
	return b.String()
}

// terminal text of a prepared cell.
func (c prepCell) terminal() string {
	s := c.human()
	if c.moved > 0 {
		s = fmt.Sprintf("[%d]", c.moved)
	}
	if c.foot != "" {
		s += superscript(c.foot)
	}
	return s
}

func renderTerminal(w io.Writer, r *Report, opt Options) error {
	W := opt.Width
	if W <= 0 {
		W = DefaultWidth
	}
	W = max(W, 40)
	for _, t := range r.Tables {
		writeTerminalTable(w, t, W)
	}
	if len(r.Notes) > 0 {
		fmt.Fprintln(w, "Notes")
		for i, n := range r.Notes {
			writeHanging(w, fmt.Sprintf("%d.", i+1), n, W)
		}
		fmt.Fprintln(w)
	}
	for _, l := range wrap("("+r.Stamp.Text(r.Command, true)+")", W) {
		fmt.Fprintln(w, l)
	}
	return nil
}

// writeHanging writes text after a marker, wrapped at W with a hanging
// indent.
func writeHanging(w io.Writer, marker, text string, W int) {
	ind := width(marker) + 1
	for i, l := range wrap(text, W-ind) {
		if i == 0 {
			fmt.Fprintf(w, "%s %s\n", marker, l)
		} else {
			fmt.Fprintf(w, "%s%s\n", strings.Repeat(" ", ind), l)
		}
	}
}

// headerLines breaks a column header into lines of at most w runes.
func headerLines(label string, w int) []string {
	if label == "" {
		return nil
	}
	return wrap(label, w)
}

func writeTerminalTable(w io.Writer, t *Table, W int) {
	maxText := max(16, min(30, W/3))
	p := prepare(t, maxText)
	const gap = 2
	// Row label column.
	lw := width(t.RowHeader)
	for _, r := range t.Rows {
		lw = max(lw, width(r.Label))
	}
	lw = min(lw, W/2)
	// Column widths: the widest cell, the unit, the longest header word,
	// and up to 14 runes of header before it wraps.
	n := len(t.Columns)
	cw := make([]int, n)
	text := make([][]string, len(t.Rows))
	for i := range t.Rows {
		text[i] = make([]string, n)
		for j := range n {
			text[i][j] = p.cells[i][j].terminal()
			cw[j] = max(cw[j], width(text[i][j]))
		}
	}
	right := make([]bool, n)
	for j, c := range t.Columns {
		num := 0
		for i := range t.Rows {
			if p.cells[i][j].numeric() {
				num++
			} else if p.cells[i][j].Kind != KindEmpty {
				num = -len(t.Rows)
			}
		}
		right[j] = num > 0
		if c.Unit != "" {
			cw[j] = max(cw[j], width(c.Unit)+2)
		}
		for _, word := range strings.Fields(c.Label) {
			cw[j] = max(cw[j], width(word))
		}
		cw[j] = max(cw[j], min(width(c.Label), 14))
		cw[j] = min(cw[j], W-lw-gap)
	}
	// Parts: columns that fit beside the row labels.
	var parts [][]int
	var cur []int
	used := lw
	for _, j := range p.shown {
		if len(cur) > 0 && used+gap+cw[j] > W {
			parts = append(parts, cur)
			cur, used = nil, lw
		}
		cur = append(cur, j)
		used += gap + cw[j]
	}
	if len(cur) > 0 || n == 0 {
		parts = append(parts, cur)
	}
	for k, part := range parts {
		title := t.Title
		if len(parts) > 1 {
			title += fmt.Sprintf(" (part %d of %d)", k+1, len(parts))
		}
		for _, l := range wrap(title, W) {
			fmt.Fprintln(w, l)
		}
		// Header: labels (bottom-aligned), then units.
		heads := make([][]string, len(part))
		hmax := 1
		for k, j := range part {
			heads[k] = headerLines(t.Columns[j].Label, cw[j])
			hmax = max(hmax, len(heads[k]))
		}
		total := lw
		for _, j := range part {
			total += gap + cw[j]
		}
		line := func(label string, cells func(k, j int) (string, bool)) {
			var b strings.Builder
			b.WriteString(pad(label, lw, false))
			for k, j := range part {
				s, r := cells(k, j)
				b.WriteString(strings.Repeat(" ", gap))
				b.WriteString(pad(s, cw[j], r))
			}
			fmt.Fprintln(w, strings.TrimRight(b.String(), " "))
		}
		for h := range hmax {
			lab := ""
			if h == hmax-1 {
				lab = t.RowHeader
			}
			line(lab, func(k, j int) (string, bool) {
				off := hmax - len(heads[k])
				if h < off {
					return "", false
				}
				return heads[k][h-off], right[j]
			})
		}
		units := false
		for _, j := range part {
			units = units || t.Columns[j].Unit != ""
		}
		if units {
			line("", func(k, j int) (string, bool) {
				if u := t.Columns[j].Unit; u != "" {
					return "(" + u + ")", right[j]
				}
				return "", false
			})
		}
		fmt.Fprintln(w, strings.Repeat("─", total))
		for i, row := range t.Rows {
			labels := wrap(row.Label, lw)
			line(labels[0], func(k, j int) (string, bool) { return text[i][j], right[j] })
			for _, l := range labels[1:] {
				fmt.Fprintln(w, l)
			}
		}
		fmt.Fprintln(w)
	}
	for i, f := range p.feet {
		writeHanging(w, superscript(letter(i)), f, W)
	}
	for i, m := range p.moved {
		writeHanging(w, fmt.Sprintf("[%d]", i+1), m, W)
	}
	for _, n := range t.Notes {
		writeHanging(w, "•", n, W)
	}
	if len(p.feet)+len(p.moved)+len(t.Notes) > 0 {
		fmt.Fprintln(w)
	}
}
