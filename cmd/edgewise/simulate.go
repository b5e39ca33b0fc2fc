package main

import (
	"bufio"
	"fmt"
	"io"
	"path/filepath"
	"strconv"
	"strings"

	"edgewise/cmd/edgewise/internal/output"
	"edgewise/models"
)

const simulateHelp = `Usage: edgewise simulate MODEL.toml [options]

Simulate the model exactly (Gillespie direct method), starting each record
from the stationary law, and write only the recorded visible events (each
kept with its label's detection probability) as CSV with columns
record,time,label. With --dead-time, events within that time after a
recorded event are lost, as on an instrument that is blind after each
detection. With --frame, each time is the start of the camera frame the
event fell in. The same --seed gives byte-identical output.

The first line is a comment, the stamp: the spec and its sha256, the
seed, the instrument (dead_time, frame), the time unit (--time-unit or the
spec's time_unit) and the visible edge in the spec's direction. inspect,
fluct and predict read the instrument, the time unit and the edge back
from it when not given, and say so.

Example:
  edgewise simulate testdata/ring3.toml --events 5000 --records 4 --seed 1 -o demo.csv

Options:
`

func cmdSimulate(args []string, stdout, stderr io.Writer) int {
	c := newCommand("simulate", simulateHelp, args, stdout, stderr)
	events := c.fs.IntP("events", "n", 1000, "visible events per record")
	records := c.fs.IntP("records", "r", 1, "number of records")
	seed := c.fs.Uint64P("seed", "s", 1, "random seed")
	dead := c.fs.Float64("dead-time", 0, "instrument dead time after each recorded event (time units)")
	frame := c.fs.Float64("frame", 0, "frame length: stamp each event with the start of its frame (time units; 0 = exact times)")
	c.outputFlags(false)
	c.timeUnitFlag()
	if code := c.parse(); code >= 0 {
		return code
	}
	if c.fs.NArg() != 1 {
		return c.usage("want one model spec, got %d arguments", c.fs.NArg())
	}
	if *events < 1 || *records < 1 {
		return c.usage("--events and --records must be at least 1")
	}
	if err := checkTimeUnit(*c.timeUnit); err != nil {
		return c.usage("%v", err)
	}
	files := output.NewFiles(stdout, *c.force)
	defer files.Close()
	if err := files.Claim("-o", *c.out); err != nil {
		return c.fail(1, err)
	}
	path := c.fs.Arg(0)
	src, m, net, err := loadModel(path)
	if err != nil {
		return c.fail(1, err)
	}
	sim, err := models.NewSimulator(net, *seed)
	if err != nil {
		return c.fail(1, err)
	}
	if err := sim.SetDeadTime(*dead); err != nil {
		return c.usage("--dead-time: %v", err)
	}
	if err := sim.SetFrame(*frame); err != nil {
		return c.usage("--frame: %v", err)
	}
	unit, _ := c.resolveTimeUnit(m.TimeUnit, "")
	stamp := []string{
		fmt.Sprintf("edgewise %s simulate", version),
		fmt.Sprintf("spec %s sha256 %s", stampWord(filepath.Base(path)), checksum(src)),
		fmt.Sprintf("seed %d", *seed), fmt.Sprintf("events %d", *events), fmt.Sprintf("records %d", *records),
		"dead_time " + strconv.FormatFloat(*dead, 'g', -1, 64), "frame " + strconv.FormatFloat(*frame, 'g', -1, 64),
	}
	if unit != "" {
		stamp = append(stamp, "time_unit "+string(unit))
	}
	if f, b, ok := specEdge(m); ok && stampWord(f) == f && stampWord(b) == b && !strings.Contains(f+b, ",") {
		stamp = append(stamp, "edge "+f+","+b)
	}
	var pb *bar
	if total := int64(*events) * int64(*records); total > 2_000_000 {
		pb = c.progress(total, "simulating", false)
	}
	gen := func(w io.Writer) error {
		bw := bufio.NewWriterSize(w, 1<<16)
		fmt.Fprintf(bw, "# %s\n", strings.Join(stamp, "; "))
		fmt.Fprintln(bw, "record,time,label")
		buf := make([]models.Event, 0, 4096)
		line := make([]byte, 0, 64)
		for r := 1; r <= *records; r++ {
			sim.StartStationary()
			for left := *events; left > 0; {
				n := min(left, 4096)
				buf, _ = sim.Visible(n, buf[:0])
				if err := sim.Err(); err != nil {
					return fmt.Errorf("record %d: %w", r, err)
				}
				left -= n
				for _, e := range buf {
					line = strconv.AppendInt(line[:0], int64(r), 10)
					line = append(line, ',')
					line = strconv.AppendFloat(line, e.Time, 'g', 17, 64)
					line = append(line, ',')
					line = append(line, net.Labels[e.Label].Name...)
					line = append(line, '\n')
					if _, err := bw.Write(line); err != nil {
						return err
					}
				}
				pb.add(n)
			}
		}
		return bw.Flush()
	}
	err = files.Write(*c.out, gen)
	pb.finish()
	if err != nil {
		return c.fail(1, err)
	}
	if n := sim.Ties(); n > 0 {
		fmt.Fprintf(stderr, "edgewise: warning: %d of %d events have the time of the previous event: their gaps are below the float64 resolution of the times (about 2.2e-16 times the time); the label sequence is exact, but an exact-time likelihood refuses zero gaps. Use shorter records (more --records, fewer --events) or --frame\n", n, *events**records)
	}
	return 0
}

// stampWord replaces spaces and semicolons, which separate the stamp's
// entries, by underscores.
func stampWord(s string) string {
	return strings.Map(func(r rune) rune {
		if r == ' ' || r == ';' || r == '\t' {
			return '_'
		}
		return r
	}, s)
}

// specEdge returns the visible edge of a spec in its own direction: + and
// - when the spec has them on exactly reversed transitions, else the two
// labels of the first edge (in the spec's order) whose directions carry
// labels found nowhere else, forward being the label of direction 0 (from
// between[0] to between[1]).
func specEdge(m *models.Model) (fwd, bwd string, ok bool) {
	uses := map[string][][2]string{} // label -> transitions (from, to)
	for _, e := range m.Edges {
		for d := 0; d < 2; d++ {
			if e.Labels[d] != "" {
				uses[e.Labels[d]] = append(uses[e.Labels[d]], [2]string{e.Between[d], e.Between[1-d]})
			}
		}
	}
	reversed := func(a, b string) bool {
		ua, ub := uses[a], uses[b]
		if len(ua) == 0 || len(ua) != len(ub) {
			return false
		}
		for _, t := range ua {
			found := false
			for _, s := range ub {
				found = found || s == [2]string{t[1], t[0]}
			}
			if !found {
				return false
			}
		}
		return true
	}
	if reversed("+", "-") {
		return "+", "-", true
	}
	for _, e := range m.Edges {
		a, b := e.Labels[0], e.Labels[1]
		if a != "" && b != "" && a != b && reversed(a, b) {
			return a, b, true
		}
	}
	return "", "", false
}
