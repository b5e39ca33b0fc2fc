// Writing records back as CSV that ReadRecords reads to the same data.

package infer

import (
	"bufio"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"edgewise/likelihood"
)

// WriteRecords writes d as CSV that ReadRecords reads back to the same
// data: a header record,time,label (the record column only when there is
// more than one record or a record has an ID), times in the shortest form
// that parses back to the same float64, and an end row for each record whose
// End is known. Fields are quoted when needed.
func WriteRecords(w io.Writer, d *likelihood.Data) error {
	for _, l := range d.Labels {
		if l == EndLabel || l == "" || strings.Contains(l, "\n") {
			return fmt.Errorf("write records: label %q cannot be written (empty, reserved or with a newline)", l)
		}
	}
	withID := len(d.Records) > 1 || (len(d.Records) == 1 && d.Records[0].ID != "")
	bw := bufio.NewWriterSize(w, 1<<16)
	if withID {
		bw.WriteString("record,time,label\n")
	} else {
		bw.WriteString("time,label\n")
	}
	names := make([]string, len(d.Labels))
	for i, l := range d.Labels {
		names[i] = quoteField(l)
	}
	line := make([]byte, 0, 64)
	for i := range d.Records {
		r := &d.Records[i]
		if withID && r.ID == "" && len(d.Records) > 1 {
			return fmt.Errorf("write records: record %d has an empty ID", i+1)
		}
		if strings.Contains(r.ID, "\n") {
			return fmt.Errorf("write records: record ID %q has a line break", r.ID)
		}
		id := quoteField(r.ID)
		put := func(t float64, lab string) {
			line = line[:0]
			if withID {
				line = append(line, id...)
				line = append(line, ',')
			}
			line = strconv.AppendFloat(line, t, 'g', -1, 64)
			line = append(line, ',')
			line = append(line, lab...)
			line = append(line, '\n')
			bw.Write(line)
		}
		for k, t := range r.Time {
			l := int(r.Label[k])
			if l >= len(names) {
				return fmt.Errorf("write records: record %q event %d: label index %d out of range", r.ID, k+1, l)
			}
			put(t, names[l])
		}
		if !math.IsNaN(r.End) {
			put(r.End, EndLabel)
		}
	}
	return bw.Flush()
}

// quoteField quotes s when the reader would not read it back unchanged.
func quoteField(s string) string {
	if s == "" {
		return s
	}
	need := strings.ContainsAny(s, ",\t\"\r\n") || s[0] == ' ' || s[len(s)-1] == ' ' || s[0] == '#'
	if !need {
		return s
	}
	return `"` + strings.ReplaceAll(s, `"`, `""`) + `"`
}
