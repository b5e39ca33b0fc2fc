package models

import (
	"bufio"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
)

// tomlQuote writes s as a TOML basic string: backslash, quote and control
// characters escaped the TOML way (Go's strconv.Quote uses escapes such as
// \a and \x00 that TOML does not have).
func tomlQuote(s string) string {
	var b strings.Builder
	b.WriteByte('"')
	for _, r := range s {
		switch r {
		case '"':
			b.WriteString(`\"`)
		case '\\':
			b.WriteString(`\\`)
		case '\b':
			b.WriteString(`\b`)
		case '\t':
			b.WriteString(`\t`)
		case '\n':
			b.WriteString(`\n`)
		case '\f':
			b.WriteString(`\f`)
		case '\r':
			b.WriteString(`\r`)
		default:
			if r < 0x20 || r == 0x7f {
				fmt.Fprintf(&b, `\u%04X`, r)
			} else {
				b.WriteRune(r)
			}
		}
	}
	b.WriteByte('"')
	return b.String()
}

// Write writes m as a TOML spec that Parse reads back to an equal Model, so
// a fitted model can be simulated and fitted again. Floats are written with
// the shortest representation that round-trips exactly.
func (m *Model) Write(w io.Writer) error {
	bw := bufio.NewWriter(w)
	q := tomlQuote
	f := func(x float64) string { return strconv.FormatFloat(x, 'g', -1, 64) }
	list := func(xs []string) string {
		s := "["
		for i, x := range xs {
			if i > 0 {
				s += ", "
			}
			s += q(x)
		}
		return s + "]"
	}
	fmt.Fprintf(bw, "name = %s\n", q(m.Name))
	if m.Description != "" {
		fmt.Fprintf(bw, "description = %s\n", q(m.Description))
	}
	if m.TimeUnit != "" {
		fmt.Fprintf(bw, "time_unit = %s\n", q(m.TimeUnit))
	}
	fmt.Fprintf(bw, "states = %s\n", list(m.States))
	for _, e := range m.Edges {
		fmt.Fprintf(bw, "\n[[edge]]\nbetween = %s\n", list(e.Between[:]))
		if e.OneWay {
			fmt.Fprintf(bw, "one_way = true\nrates = %s\n", list(e.Rates[:1]))
		} else {
			fmt.Fprintf(bw, "rates = %s\n", list(e.Rates[:]))
		}
		if e.Labels != [2]string{} {
			fmt.Fprintf(bw, "labels = %s\n", list(e.Labels[:]))
		}
	}
	for _, p := range m.Params {
		fmt.Fprintf(bw, "\n[param.%s]\nvalue = %s\n", q(p.Name), f(p.Value))
		if p.Fixed {
			fmt.Fprintf(bw, "fixed = true\n")
		}
		if p.Lower != 0 {
			fmt.Fprintf(bw, "lower = %s\n", f(p.Lower))
		}
		top := math.Inf(1)
		if p.Kind == DetectParam {
			top = 1
		}
		if p.Upper != top {
			fmt.Fprintf(bw, "upper = %s\n", f(p.Upper))
		}
	}
	for _, l := range m.Labels {
		if l.Param != "" {
			fmt.Fprintf(bw, "\n[label.%s]\ndetect = %s\n", q(l.Name), q(l.Param))
		} else {
			fmt.Fprintf(bw, "\n[label.%s]\ndetect = %s\n", q(l.Name), f(l.Detect))
		}
	}
	for _, a := range m.Affinities {
		fmt.Fprintf(bw, "\n[[affinity]]\ncycle = %s\n", list(a.Cycle))
		if a.Edges != nil {
			idx := make([]string, len(a.Edges))
			for i, e := range a.Edges {
				idx[i] = strconv.Itoa(e)
			}
			fmt.Fprintf(bw, "edges = [%s]\n", strings.Join(idx, ", "))
		}
		fmt.Fprintf(bw, "value = %s\nsolve = %s\n", f(a.Value), q(a.Solve))
	}
	return bw.Flush()
}
