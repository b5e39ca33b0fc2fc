package output

import (
	"strings"
	"unicode/utf8"
)

// genericReasons are reasons of undefined values too plain to earn a
// footnote.
var genericReasons = map[string]bool{"": true, "undefined": true, "not tested": true, "no interval": true}

// prepCell is a cell ready for a human format: its footnote letter ("" for
// none) and, when its text moved to a numbered note, the note's number.
type prepCell struct {
	Cell
	foot  string // footnote letter
	moved int    // 1-based number of the note holding its text; 0: in place
}

// prepTable is a table ready for a human format.
type prepTable struct {
	*Table
	cells [][]prepCell
	feet  []string // footnote texts, lettered a, b, ... in order
	moved []string // texts moved out of cells, numbered 1, 2, ...
	shown []int    // columns with at least one non-empty cell
}

// letter returns the i-th footnote letter: a..z, then aa, ab, ...
func letter(i int) string {
	s := ""
	for {
		s = string(rune('a'+i%26)) + s
		i = i/26 - 1
		if i < 0 {
			return s
		}
	}
}

// prepare assigns footnote letters (one per distinct note text, the reason
// of an undefined value counting as a note) and moves text cells longer
// than maxText runes (maxText <= 0: none) to numbered notes.
func prepare(t *Table, maxText int) *prepTable {
	p := &prepTable{Table: t, cells: make([][]prepCell, len(t.Rows))}
	feet := map[string]string{}
	moved := map[string]int{}
	for i, r := range t.Rows {
		p.cells[i] = make([]prepCell, len(r.Cells))
		for j, c := range r.Cells {
			pc := prepCell{Cell: c}
			note := c.Note
			if note == "" && c.Kind == KindUndefined && !genericReasons[c.Text] {
				note = c.Text
			}
			if note != "" {
				note = oneLine(note)
				if _, ok := feet[note]; !ok {
					feet[note] = letter(len(p.feet))
					p.feet = append(p.feet, note)
				}
				pc.foot = feet[note]
			}
			if c.Kind == KindText && maxText > 0 && utf8.RuneCountInString(c.Text) > maxText {
				txt := oneLine(c.Text)
				if _, ok := moved[txt]; !ok {
					p.moved = append(p.moved, txt)
					moved[txt] = len(p.moved)
				}
				pc.moved = moved[txt]
			}
			p.cells[i][j] = pc
		}
	}
	for j, c := range t.Columns {
		if c.MachineOnly {
			continue
		}
		for _, r := range t.Rows {
			if r.Cells[j].Kind != KindEmpty {
				p.shown = append(p.shown, j)
				break
			}
		}
	}
	if len(t.Rows) == 0 {
		for j, c := range t.Columns {
			if !c.MachineOnly {
				p.shown = append(p.shown, j)
			}
		}
	}
	return p
}

// wrap breaks s into lines of at most width runes at spaces; a word
// longer than width is cut.
func wrap(s string, width int) []string {
	var lines []string
	line := ""
	var words []string
	for _, w := range strings.Fields(s) {
		for width > 0 && utf8.RuneCountInString(w) > width {
			r := []rune(w)
			words = append(words, string(r[:width]))
			w = string(r[width:])
		}
		words = append(words, w)
	}
	for _, w := range words {
		switch {
		case line == "":
			line = w
		case utf8.RuneCountInString(line)+1+utf8.RuneCountInString(w) <= width:
			line += " " + w
		default:
			lines = append(lines, line)
			line = w
		}
	}
	if line != "" || len(lines) == 0 {
		lines = append(lines, line)
	}
	return lines
}
