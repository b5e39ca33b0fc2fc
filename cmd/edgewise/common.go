package main

import (
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"
	"unicode"

	"edgewise/cmd/edgewise/internal/output"

	"github.com/spf13/pflag"
	"golang.org/x/term"
)

// command holds what every subcommand shares: its name and help, the
// standard streams, its flag set and the output options.
type command struct {
	name, help     string
	stdout, stderr io.Writer
	fs             *pflag.FlagSet
	args           []string

	format   *string // nil for a command without tables
	out      *string
	force    *bool
	quiet    *bool
	timeUnit *string
}

// newCommand makes the flag set of a subcommand. Its usage text (help, then
// the option list) goes to stdout when help was asked for and to stderr
// after a usage error.
func newCommand(name, help string, args []string, stdout, stderr io.Writer) *command {
	c := &command{name: name, help: help, stdout: stdout, stderr: stderr, args: args}
	c.fs = newFlags(name, help, args, stdout, stderr)
	return c
}

// outputFlags declares -o, --force and --quiet, and --format when the
// command prints tables.
func (c *command) outputFlags(tables bool) {
	if tables {
		c.format = c.fs.StringP("format", "f", "table", "output format: "+output.Formats)
	}
	c.out = c.fs.StringP("output", "o", "-", "output file (- for standard output; devices such as /dev/null are written in place)")
	c.force = c.fs.Bool("force", false, "overwrite existing output files")
	c.quiet = c.fs.BoolP("quiet", "q", false, "no progress bar on standard error")
}

// timeUnitFlag declares --time-unit.
func (c *command) timeUnitFlag() {
	c.timeUnit = c.fs.String("time-unit", "", "name of the time unit of the records and rates, e.g. ms (default: from the spec's time_unit or the records' stamp)")
}

// parse parses the arguments; it returns -1 to go on, else the exit code
// (0 after help, 2 after a usage error).
func (c *command) parse() int { return parseFlags(c.fs, c.args) }

// usageLine is the first line of the help text.
func (c *command) usageLine() string {
	line, _, _ := strings.Cut(c.help, "\n")
	return line
}

// fail reports err with the one error prefix "edgewise CMD: " and returns
// code.
func (c *command) fail(code int, err error) int {
	fmt.Fprintf(c.stderr, "edgewise %s: %v\n", c.name, err)
	var k *kindError
	if errors.As(err, &k) {
		fmt.Fprintf(c.stderr, "%s\n", c.usageLine())
		return 2
	}
	return code
}

// usage reports a usage error (exit code 2) with the usage line.
func (c *command) usage(format string, a ...any) int {
	fmt.Fprintf(c.stderr, "edgewise %s: %s\n%s\n(see edgewise %s --help)\n", c.name, fmt.Sprintf(format, a...), c.usageLine(), c.name)
	return 2
}

// outputFormat returns the format asked for.
func (c *command) outputFormat() (output.Format, error) {
	return output.ParseFormat(*c.format)
}

// checkTimeUnit validates a time unit name: 1 to 16 letters, digits or
// the characters µ . _ (no spaces, slashes or parentheses, which would
// make units such as 1/ms ambiguous).
func checkTimeUnit(u string) error {
	if u == "" {
		return nil
	}
	if len([]rune(u)) > 16 {
		return fmt.Errorf("--time-unit %q: at most 16 characters", u)
	}
	for _, r := range u {
		if !unicode.IsLetter(r) && !unicode.IsDigit(r) && r != '.' && r != '_' {
			return fmt.Errorf("--time-unit %q: want letters or digits, e.g. ms, s, us", u)
		}
	}
	return nil
}

// resolveTimeUnit picks the time unit: the flag, else the spec's, else the
// records' stamp; it returns the unit and a note saying where it came from
// (empty when from the flag or unnamed).
func (c *command) resolveTimeUnit(spec, stamp string) (output.TimeUnit, string) {
	switch {
	case c.timeUnit != nil && *c.timeUnit != "":
		return output.TimeUnit(*c.timeUnit), ""
	case spec != "" && stamp != "" && spec != stamp:
		return output.TimeUnit(spec), fmt.Sprintf("time unit %s from the spec; the records' stamp says %s", spec, stamp)
	case spec != "":
		return output.TimeUnit(spec), ""
	case stamp != "":
		return output.TimeUnit(stamp), fmt.Sprintf("time unit %s read from the records' stamp", stamp)
	}
	return "", ""
}

// termWidth is the width terminal tables must fit: COLUMNS when set, the
// terminal's width when writing to one, else output.DefaultWidth.
func termWidth(w io.Writer, path string) int {
	if n, err := strconv.Atoi(os.Getenv("COLUMNS")); err == nil && n > 0 {
		return n
	}
	if f, ok := w.(*os.File); ok && path == "-" && term.IsTerminal(int(f.Fd())) {
		if n, _, err := term.GetSize(int(f.Fd())); err == nil && n > 0 {
			return n
		}
	}
	return output.DefaultWidth
}

// emitReport writes the report in the chosen format to -o, through files
// (which the command made and claimed -o on).
func (c *command) emitReport(files *output.Files, r *output.Report) error {
	f, err := c.outputFormat()
	if err != nil {
		return err
	}
	opt := output.Options{Width: termWidth(c.stdout, *c.out)}
	return files.Write(*c.out, func(w io.Writer) error { return output.Render(w, r, f, opt) })
}

// newReport starts a report with the stamp of this command.
func (c *command) newReport(inputs []output.Input, seed *uint64, unit output.TimeUnit) *output.Report {
	return &output.Report{Command: c.name, Stamp: output.Stamp{Tool: "edgewise " + version, Args: c.args, Inputs: inputs, Seed: seed, TimeUnit: unit}}
}

// kindError is a file of the wrong kind: a spec where records are
// expected, or the other way round. It is a usage error (exit code 2).
type kindError struct {
	path, is, want string
}

func (e *kindError) Error() string {
	return fmt.Sprintf("%s: this looks like %s, not %s", e.path, e.is, e.want)
}

// sniff says what the start of a file looks like: "spec" (TOML: a
// [table] header or key = value), "records" (a header line with a time
// column and commas or tabs), or "" when unsure.
func sniff(head []byte) string {
	for _, line := range strings.Split(string(head), "\n") {
		l := strings.TrimSpace(line)
		if l == "" || strings.HasPrefix(l, "#") {
			continue
		}
		low := strings.ToLower(l)
		if strings.HasPrefix(l, "[") {
			return "spec"
		}
		if k, _, ok := strings.Cut(l, "="); ok && !strings.ContainsAny(k, ",\t") && strings.TrimSpace(k) != "" {
			return "spec"
		}
		if strings.ContainsAny(l, ",\t") {
			for _, f := range strings.FieldsFunc(low, func(r rune) bool { return r == ',' || r == '\t' }) {
				if f := strings.Trim(strings.TrimSpace(f), `"`); f == "time" {
					return "records"
				}
			}
		}
		return ""
	}
	return ""
}

// specKind and recordsKind describe the two kinds of input in messages.
const (
	specKind    = "a model spec (TOML)"
	recordsKind = "records (CSV or TSV with a time column)"
)

// checksum is the hex sha256 of b.
func checksum(b []byte) string {
	s := sha256.Sum256(b)
	return hex.EncodeToString(s[:])
}
