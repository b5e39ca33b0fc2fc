package main

import (
	"fmt"
	"strings"

	"edgewise/infer"

	"github.com/spf13/pflag"
)

// recordFlags are the options shared by every command that reads records,
// so that they have the same names and meaning everywhere.
type recordFlags struct {
	rename *string
	trace  *bool
	edge   *string
	level  *float64
}

// addRecordFlags declares --rename, --trace, --edge and --level on fs.
func addRecordFlags(fs *pflag.FlagSet) *recordFlags {
	return &recordFlags{
		rename: fs.String("rename", "", "rename labels of the records file, e.g. fwd=+,bwd=- (then every label must be one of the new names)"),
		trace:  fs.Bool("trace", false, "the records file is a state trace (columns time, state); each change X to Y is an event labelled X>Y"),
		edge:   fs.String("edge", "+,-", "forward and backward label of the visible edge"),
		level:  fs.Float64("level", 0.95, "confidence level of intervals"),
	}
}

// readOptions builds the reader's options from --rename and --trace.
func (rf *recordFlags) readOptions() (infer.ReadOptions, error) {
	opt := infer.ReadOptions{Trace: *rf.trace}
	if *rf.rename != "" {
		m, known, err := parseLabelMap(*rf.rename)
		if err != nil {
			return opt, fmt.Errorf("--rename: %w", err)
		}
		opt.Labels, opt.Known = m, known
	}
	return opt, nil
}

// edgeLabels returns the forward and backward label named by --edge.
func (rf *recordFlags) edgeLabels() (string, string, error) {
	a, b, ok := strings.Cut(*rf.edge, ",")
	a, b = strings.TrimSpace(a), strings.TrimSpace(b)
	if !ok || a == "" || b == "" || a == b || strings.Contains(b, ",") {
		return "", "", fmt.Errorf("--edge %q: want two different labels, e.g. +,-", *rf.edge)
	}
	return a, b, nil
}

// checkLevel validates --level.
func (rf *recordFlags) checkLevel() error {
	if !(*rf.level > 0 && *rf.level < 1) {
		return fmt.Errorf("--level %v: want a value between 0 and 1", *rf.level)
	}
	return nil
}
