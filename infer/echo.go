// Limits on the size of names and lines in a records file, and the
// truncated echo of input in error messages.

package infer

import (
	"fmt"
	"strconv"
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

// echoBytes is how much of an input string an error message repeats.
const echoBytes = 40

// clip quotes s for an error message, cut to its first 40 bytes (at a
// character boundary) with the full length said, so that a message never
// repeats a long input whole.
func clip[T string | []byte](s T) string {
	if len(s) <= echoBytes {
		return strconv.Quote(string(s))
	}
	cut := echoBytes
	for cut > 0 && !isRuneStart(s[cut]) {
		cut--
	}
	return fmt.Sprintf("%s... (%d bytes)", strconv.Quote(string(s[:cut])), len(s))
}

func isRuneStart(b byte) bool { return b&0xc0 != 0x80 }

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
