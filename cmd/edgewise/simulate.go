package main

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strconv"

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

Example:
  edgewise simulate testdata/ring3.toml --events 5000 --records 4 --seed 1 -o demo.csv

Options:
`

func cmdSimulate(args []string, stdout, stderr io.Writer) int {
	fs := newFlags("simulate", simulateHelp, args, stdout, stderr)
	events := fs.IntP("events", "n", 1000, "visible events per record")
	records := fs.IntP("records", "r", 1, "number of records")
	seed := fs.Uint64P("seed", "s", 1, "random seed")
	out := fs.StringP("output", "o", "-", "output file (- for standard output)")
	force := fs.Bool("force", false, "overwrite an existing output file")
	dead := fs.Float64("dead-time", 0, "instrument dead time after each recorded event (time units)")
	frame := fs.Float64("frame", 0, "frame length: stamp each event with the start of its frame (time units; 0 = exact times)")
	if code := parseFlags(fs, args); code >= 0 {
		return code
	}
	if fs.NArg() != 1 {
		fs.Usage()
		return 2
	}
	if *events < 1 || *records < 1 {
		return usageError(stderr, "simulate", "--events and --records must be at least 1")
	}
	if err := checkOutput(*out, *force); err != nil {
		fmt.Fprintf(stderr, "edgewise: %v\n", err)
		return 1
	}
	path := fs.Arg(0)
	src, _, net, err := loadModel(path)
	if err != nil {
		fmt.Fprintf(stderr, "edgewise: %v\n", err)
		return 1
	}
	sim, err := models.NewSimulator(net, *seed)
	if err != nil {
		fmt.Fprintf(stderr, "edgewise: %v\n", err)
		return 1
	}
	if err := sim.SetDeadTime(*dead); err != nil {
		fmt.Fprintf(stderr, "edgewise: --dead-time: %v\n", err)
		return 2
	}
	if err := sim.SetFrame(*frame); err != nil {
		fmt.Fprintf(stderr, "edgewise: --frame: %v\n", err)
		return 2
	}
	gen := func(w io.Writer) error {
		bw := bufio.NewWriterSize(w, 1<<16)
		fmt.Fprintf(bw, "# edgewise %s simulate %s sha256 %s seed %d events %d records %d dead-time %g frame %g\n", version, filepath.Base(path), checksum(src)[:12], *seed, *events, *records, *dead, *frame)
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
					bw.Write(line)
				}
			}
		}
		return bw.Flush()
	}
	if err := emit(*out, *force, stdout, gen); err != nil {
		fmt.Fprintf(stderr, "edgewise: %v\n", err)
		return 1
	}
	if n := sim.Ties(); n > 0 {
		fmt.Fprintf(stderr, "edgewise: warning: %d of %d events have the time of the previous event: their gaps are below the float64 resolution of the times (about 2.2e-16 times the time); the label sequence is exact, but an exact-time likelihood refuses zero gaps. Use shorter records (more --records, fewer --events) or --frame\n", n, *events**records)
	}
	return 0
}

// writeAtomic writes a file through a temporary file in the same folder and
// a rename, so a reader never sees a partial file; it refuses to replace an
// existing file unless force is set.
func writeAtomic(path string, force bool, gen func(io.Writer) error) error {
	if err := checkOutput(path, force); err != nil {
		return err
	}
	tmp, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return fmt.Errorf("cannot write %s: %w", path, errors.Unwrap(err))
	}
	defer os.Remove(tmp.Name())
	if err := gen(tmp); err != nil {
		tmp.Close()
		return err
	}
	// CreateTemp makes the file owner-only; an output is for sharing.
	if err := tmp.Chmod(0o644); err != nil {
		tmp.Close()
		return err
	}
	if err := tmp.Sync(); err != nil {
		tmp.Close()
		return fmt.Errorf("writing %s: %w", path, err)
	}
	if err := tmp.Close(); err != nil {
		return err
	}
	return os.Rename(tmp.Name(), path)
}

// emit writes gen's output to standard output when path is "-", else to
// the file path through writeAtomic.
func emit(path string, force bool, stdout io.Writer, gen func(io.Writer) error) error {
	if path == "-" {
		return gen(stdout)
	}
	return writeAtomic(path, force, gen)
}

// checkOutput fails when path exists and force is not set, so that a
// command can refuse before doing its work. "-" (standard output) is fine.
func checkOutput(path string, force bool) error {
	if path == "-" || force {
		return nil
	}
	if _, err := os.Stat(path); err == nil {
		return fmt.Errorf("%s exists; use --force to overwrite", path)
	}
	return nil
}
