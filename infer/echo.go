// Limits on the size of names and lines in a records file, and the
// truncated echo of input in error messages.

package infer

import (
	"edgewise/models"
	"fmt"
	"strings"
)

// Limits of a records file. A label, state name or record ID beyond its
// limit, or a line beyond MaxLineBytes, is refused with an error that says
// the limit: names are printed in every table and message, and a file
// whose names or lines are that long is not a records file.
const (
	MaxLabelBytes    = 100     // a label or a state name of a trace
	MaxRecordIDBytes = 256     // a record ID
	MaxLineBytes     = 1 << 20 // a line
)

// clip is models.Clip for a string or bytes.
func clip[T string | []byte](s T) string { return models.Clip(string(s)) }

// clipList joins names with ", " for a message, each clipped, and at most
// 10 of them.
func clipList(names []string) string {
	var b strings.Builder
	for i, n := range names {
		if i == 10 {
			fmt.Fprintf(&b, ", ... (%d in all)", len(names))
			break
		}
		if i > 0 {
			b.WriteString(", ")
		}
		b.WriteString(clip(n))
	}
	return b.String()
}
