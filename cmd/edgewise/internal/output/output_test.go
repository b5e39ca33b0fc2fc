package output

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// sample is a report with every kind of cell, awkward numbers (subnormal,
// huge, negative zero, 0.1 + 0.2), footnotes, long text and a wide table.
func sample() *Report {
	t := NewTable("values", "Values of every kind", "quantity",
		Col("value", "value", "1/ms"), Col("se", "SE", "1/ms"), Col("interval", "95% interval", "1/ms"), Col("p", "p", ""), Col("reading", "reading", ""))
	t.Add("a", "a number", Num(0.1+0.2), Num(5e-324), Interval(-1e300, math.Inf(1), 0.95, "exact"), P(1e-320), Text("a reading that is much too long to stay in a cell of a terminal table, so it moves to a note"))
	t.Add("b", "a count", Count(123456789), Fixed(-334271.234567, 2), Interval(0.1, 0.7, 0.9, "jackknife"), P(0.0312), Text("short"))
	t.Add("c", "P(+|+) & 50% #1 {x}_y", Num(math.Copysign(0, -1)), Undefined("too few events"), Undefined("no interval"), P(math.NaN()), Empty())
	t.Add("d", "zero and inf", ZeroIf(-3.9e-17, true), Num(math.Inf(-1)), Interval(math.Inf(-1), 2, 0.95, "one-sided"), P(1), Text("with \"quotes\", commas").WithNote("a footnote, with a comma"))
	t.Note("a note under the table")
	wide := NewTable("wide", "A table wider than any terminal", "n")
	for j := range 14 {
		wide.Columns = append(wide.Columns, Col(fmt.Sprintf("c%d", j), fmt.Sprintf("column number %d", j), "k_BT"))
	}
	for i := range 3 {
		var cells []Cell
		for j := range 14 {
			cells = append(cells, Num(math.Pi*float64(i*j+1)*1e-7))
		}
		wide.Add(strconv.Itoa(i), strconv.Itoa(i), cells...)
	}
	r := &Report{Command: "test", Stamp: Stamp{Tool: "edgewise test", Args: []string{"x.csv", "--seed", "3"}, Inputs: []Input{{Name: "x.csv", SHA256: strings.Repeat("ab", 32)}}, Seed: SeedOf(3), TimeUnit: "ms"}, Tables: []*Table{t, wide}}
	r.Note("a report note")
	return r
}

var allFormats = []Format{Terminal, Markdown, LaTeX, CSV, JSON}

// failAt is a writer that fails once n bytes were written.
type failAt struct{ n, done int }

var errFull = errors.New("no space left")

func (f *failAt) Write(p []byte) (int, error) {
	if f.done+len(p) > f.n {
		k := f.n - f.done
		f.done = f.n
		return k, errFull
	}
	f.done += len(p)
	return len(p), nil
}

// TestRenderWriteFailure: a writer that fails at any byte position makes
// Render return the error, in every format (issue 8: outputs never lost).
func TestRenderWriteFailure(t *testing.T) {
	small := sample()
	small.Tables = small.Tables[:1]
	for _, r := range []*Report{small, sample()} {
		for _, f := range allFormats {
			var full bytes.Buffer
			if err := Render(&full, r, f, Options{}); err != nil {
				t.Fatal(err)
			}
			// Every position of the small report; every 7th of the full one.
			step := 1
			if r != small {
				step = 7
			}
			for n := 0; n < full.Len(); n += step {
				if err := Render(&failAt{n: n}, r, f, Options{}); !errors.Is(err, errFull) {
					t.Fatalf("%s: failure at byte %d of %d not reported: %v", f, n, full.Len(), err)
				}
			}
		}
	}
}

// TestMachineNumbersExact: every number read back from CSV (Go's csv
// reader skipping '#' lines, ParseFloat) and JSON (decoded into float64)
// is bit for bit the value put in.
func TestMachineNumbersExact(t *testing.T) {
	r := sample()
	var want []float64
	for _, tb := range r.Tables {
		for _, row := range tb.Rows {
			for _, c := range row.Cells {
				switch c.Kind {
				case KindNumber, KindCount, KindP, KindFixed:
					want = append(want, c.Value)
				case KindInterval:
					want = append(want, c.Lo, c.Hi)
				}
			}
		}
	}
	var b bytes.Buffer
	if err := Render(&b, r, CSV, Options{}); err != nil {
		t.Fatal(err)
	}
	cr := csv.NewReader(&b)
	cr.Comment = '#'
	rows, err := cr.ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	var got []float64
	parse := func(s string) {
		if s == "" {
			return
		}
		x, err := strconv.ParseFloat(s, 64)
		if err != nil {
			t.Fatalf("%q: %v", s, err)
		}
		got = append(got, x)
	}
	for _, row := range rows[1:] {
		if row[6] == "interval" {
			parse(row[8])
			parse(row[9])
		} else if row[6] != "undefined" && row[6] != "zero" {
			parse(row[7])
		}
	}
	same := func(what string, got []float64) {
		if len(got) != len(want) {
			t.Fatalf("%s: %d numbers, want %d", what, len(got), len(want))
		}
		for i := range want {
			if math.Float64bits(got[i]) != math.Float64bits(want[i]) {
				t.Errorf("%s: number %d: %v (%x), want %v (%x)", what, i, got[i], math.Float64bits(got[i]), want[i], math.Float64bits(want[i]))
			}
		}
	}
	same("csv", got)

	b.Reset()
	if err := Render(&b, r, JSON, Options{}); err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Tables []struct {
			Columns []struct{ Key string }
			Rows    []struct{ Cells map[string]map[string]any }
		}
	}
	if err := json.Unmarshal(b.Bytes(), &doc); err != nil {
		t.Fatal(err)
	}
	got = got[:0]
	for _, tb := range doc.Tables {
		for _, row := range tb.Rows {
			for _, c := range tb.Columns {
				cell, ok := row.Cells[c.Key]
				if !ok {
					continue
				}
				num := func(k string) {
					switch v := cell[k].(type) {
					case float64:
						got = append(got, v)
					case nil:
						reason, _ := cell["reason"].(string)
						switch {
						case strings.Contains(reason, k+" +inf") || k == "value" && reason == "+inf" || k == "upper" && strings.Contains(reason, "upper inf"):
							got = append(got, math.Inf(1))
						case strings.Contains(reason, k+" -inf") || k == "value" && reason == "-inf":
							got = append(got, math.Inf(-1))
						default:
							t.Errorf("null %s without a reason: %v", k, cell)
						}
					}
				}
				switch cell["kind"] {
				case "number", "count", "p", "fixed":
					num("value")
				case "interval":
					num("lower")
					num("upper")
				}
			}
		}
	}
	same("json", got)
}

// TestTerminalWidth: no line of the terminal format is wider than asked,
// the long reading moved to a numbered note, and the wide table split.
func TestTerminalWidth(t *testing.T) {
	for _, w := range []int{60, 80, 100} {
		var b bytes.Buffer
		if err := Render(&b, sample(), Terminal, Options{Width: w}); err != nil {
			t.Fatal(err)
		}
		for _, l := range strings.Split(b.String(), "\n") {
			if width(l) > w {
				t.Errorf("width %d: line of %d: %q", w, width(l), l)
			}
		}
		s := b.String()
		if !strings.Contains(s, "[1] a reading that is much too long") || !strings.Contains(s, "(part 2 of") {
			t.Errorf("width %d: no moved note or no split:\n%s", w, s)
		}
	}
}

func TestShowSample(t *testing.T) {
	if !testing.Verbose() {
		t.Skip()
	}
	for _, f := range allFormats {
		var b bytes.Buffer
		Render(&b, sample(), f, Options{Width: 100})
		t.Log("\n" + b.String())
	}
}

// TestKey: machine keys from labels.
func TestKey(t *testing.T) {
	for in, want := range map[string]string{"P(+|+)": "P_plus_plus", "F": "F", "+": "plus", "A>B": "A_B", "ln L per gap": "ln_L_per_gap", "n_++": "n_plus_plus", "post-selected": "post_selected", "P(-|-)": "P_minus_minus", "-": "minus"} {
		if got := Key(in); got != want {
			t.Errorf("Key(%q) = %q, want %q", in, got, want)
		}
	}
}

// TestLaTeXCompiles: the LaTeX output compiles with pdflatex (when
// installed) with the packages it names.
func TestLaTeXCompiles(t *testing.T) {
	if _, err := exec.LookPath("pdflatex"); err != nil {
		t.Skip("pdflatex not installed")
	}
	dir := t.TempDir()
	var b bytes.Buffer
	if err := Render(&b, sample(), LaTeX, Options{}); err != nil {
		t.Fatal(err)
	}
	doc := "\\documentclass{article}\n\\usepackage[T1]{fontenc}\n" + LaTeXPreamble + "\n\\begin{document}\n" + b.String() + "\\end{document}\n"
	if err := os.WriteFile(filepath.Join(dir, "t.tex"), []byte(doc), 0o644); err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command("pdflatex", "-interaction=nonstopmode", "-halt-on-error", "t.tex")
	cmd.Dir = dir
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("pdflatex: %v\n%s\n%s", err, out, doc)
	}
}
