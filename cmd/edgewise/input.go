package main

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"
	"time"

	"edgewise/cmd/edgewise/internal/output"
	"edgewise/infer"
	"edgewise/likelihood"

	"github.com/schollz/progressbar/v3"
	"github.com/spf13/pflag"
	"golang.org/x/term"
)

// recordFlags are the options shared by every command that reads records,
// so that they have the same names and meaning everywhere.
type recordFlags struct {
	rename *string
	trace  *bool
	edge   *string
	level  *float64
	fs     *pflag.FlagSet
}

// addRecordFlags declares --rename, --trace, --edge and --level on fs.
func addRecordFlags(fs *pflag.FlagSet) *recordFlags {
	return &recordFlags{
		rename: fs.String("rename", "", "rename labels of the records file, e.g. fwd=+,bwd=- (then every label must be one of the new names)"),
		trace:  fs.Bool("trace", false, "the records file is a state trace (columns time, state); each change X to Y is an event labelled X>Y"),
		edge:   fs.String("edge", "+,-", "forward and backward label of the visible edge (default: + and -, else the edge the records' stamp names, else the two labels of the records in order of first appearance)"),
		level:  fs.Float64("level", 0.95, "confidence level of intervals"),
		fs:     fs,
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
	return splitEdge(*rf.edge)
}

func splitEdge(s string) (string, string, error) {
	a, b, ok := strings.Cut(s, ",")
	a, b = strings.TrimSpace(a), strings.TrimSpace(b)
	if !ok || a == "" || b == "" || a == b || strings.Contains(b, ",") {
		return "", "", fmt.Errorf("--edge %q: want two different labels, e.g. +,-", s)
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

// chooseEdge applies the direction rule of records without a spec:
// --edge when given; + and - when the records have them; the edge named
// in the records' stamp (the spec's direction, written by simulate); the
// two labels of the records in order of first appearance. With more
// labels it is an error that names them and shows the --edge to write.
// note says which label is forward when the rule chose it.
func (rf *recordFlags) chooseEdge(in *recordsInput) (fwd, bwd, note string, err error) {
	if rf.fs.Changed("edge") {
		fwd, bwd, err = rf.edgeLabels()
		return fwd, bwd, "", err
	}
	labels := in.d.Labels
	has := func(l string) bool {
		for _, x := range labels {
			if x == l {
				return true
			}
		}
		return false
	}
	if has("+") && has("-") || len(labels) == 1 && (has("+") || has("-")) {
		return "+", "-", "", nil
	}
	if e, ok := in.stamp["edge"]; ok {
		if a, b, err := splitEdge(e); err == nil && has(a) && has(b) {
			return a, b, fmt.Sprintf("visible edge from the records' stamp (the spec's direction): forward %s, backward %s", a, b), nil
		}
	}
	if len(labels) == 2 {
		return labels[0], labels[1], fmt.Sprintf("visible edge: forward %s (the first label in the records), backward %s; --edge %s,%s reverses it", labels[0], labels[1], labels[1], labels[0]), nil
	}
	ex := "A,B"
	if len(labels) >= 2 {
		ex = labels[0] + "," + labels[1]
	}
	return "", "", "", fmt.Errorf("%s has %d labels (%s): name the visible edge with --edge FORWARD,BACKWARD, e.g. --edge %s", in.name, len(labels), strings.Join(labels, ", "), ex)
}

// recordsInput is a records file as read, with its checksum and the
// simulate stamp of its first comment line.
type recordsInput struct {
	path, name string // as given, and as named in messages ("stdin" for -)
	d          *likelihood.Data
	rep        *infer.ReadReport
	sha        string
	stamp      simStamp
}

// input returns the stamp entry of the records.
func (in *recordsInput) input() output.Input {
	return output.Input{Name: in.name, SHA256: in.sha}
}

// headBuffer keeps the first bytes written to it.
type headBuffer struct{ bytes.Buffer }

func (h *headBuffer) Write(p []byte) (int, error) {
	if n := 4096 - h.Len(); n > 0 {
		h.Buffer.Write(p[:min(n, len(p))])
	}
	return len(p), nil
}

// readRecords reads records from path ("-": stdin), hashing the bytes
// read, with a progress bar for large files. A file that is not records
// but looks like a spec gets a kindError.
func (c *command) readRecords(path string, stdin io.Reader, opt infer.ReadOptions) (*recordsInput, error) {
	in := &recordsInput{path: path, name: path}
	var src io.Reader
	var size int64 = -1
	if path == "-" {
		src, in.name = stdin, "stdin"
	} else {
		f, err := os.Open(path)
		if err != nil {
			return nil, err
		}
		defer f.Close()
		src = f
		if fi, err := f.Stat(); err == nil && fi.Mode().IsRegular() {
			opt.SizeHint = fi.Size()
			size = fi.Size()
		}
	}
	h := sha256.New()
	var head headBuffer
	var tee io.Writer = io.MultiWriter(h, &head)
	var pb *bar
	if size > 20<<20 {
		pb = c.progress(size, "reading "+in.name, true)
		tee = io.MultiWriter(h, &head, pb)
	}
	d, rep, err := infer.ReadRecords(io.TeeReader(src, tee), in.name, opt)
	pb.finish()
	if err != nil {
		if sniff(head.Bytes()) == "spec" {
			return nil, &kindError{path: in.name, is: specKind, want: recordsKind}
		}
		return nil, err
	}
	// Hash whatever the reader left unread, so that the checksum is the
	// input's whatever the reader does.
	if _, err := io.Copy(h, src); err != nil {
		return nil, fmt.Errorf("%s: %w", in.name, err)
	}
	in.d, in.rep, in.sha = d, rep, hex.EncodeToString(h.Sum(nil))
	in.stamp = parseSimStamp(rep.Stamp)
	return in, nil
}

// simStamp holds the entries of the stamp simulate writes as the first
// comment line of a records file: spec, sha256, seed, events, records,
// dead_time, frame, time_unit, edge. Older stamps ("dead-time 0") are read
// too.
type simStamp map[string]string

var simStampKeys = map[string]bool{"spec": true, "sha256": true, "seed": true, "events": true, "records": true, "dead_time": true, "frame": true, "time_unit": true, "edge": true}

func parseSimStamp(s string) simStamp {
	f := strings.Fields(strings.ReplaceAll(s, ";", " "))
	if len(f) < 3 || f[0] != "edgewise" || f[2] != "simulate" {
		return nil
	}
	m := simStamp{}
	for i := 3; i+1 < len(f); i++ {
		k := strings.ReplaceAll(f[i], "-", "_")
		if simStampKeys[k] {
			m[k] = f[i+1]
			i++
		}
	}
	return m
}

// float returns a number of the stamp.
func (s simStamp) float(key string) (float64, bool) {
	v, ok := s[key]
	if !ok {
		return 0, false
	}
	x, err := strconv.ParseFloat(v, 64)
	return x, err == nil
}

// parseLabelMap parses "a=+,b=-" into a renaming map and the list of new
// names in order of first mention.
func parseLabelMap(s string) (map[string]string, []string, error) {
	m := make(map[string]string)
	var known []string
	seen := make(map[string]bool)
	for _, kv := range strings.Split(s, ",") {
		k, v, ok := strings.Cut(kv, "=")
		k, v = strings.TrimSpace(k), strings.TrimSpace(v)
		if !ok || k == "" || v == "" {
			return nil, nil, fmt.Errorf("%q: want FILE_LABEL=MODEL_LABEL", kv)
		}
		if _, dup := m[k]; dup {
			return nil, nil, fmt.Errorf("label %q renamed twice", k)
		}
		m[k] = v
		if !seen[v] {
			seen[v] = true
			known = append(known, v)
		}
	}
	return m, known, nil
}

// bar is a progress bar on standard error; a nil *bar does nothing.
type bar struct{ pb *progressbar.ProgressBar }

// progress returns a progress bar of max units (max < 0: a spinner) when
// standard error is a terminal and --quiet is not set, else nil.
func (c *command) progress(max int64, desc string, bytes bool) *bar {
	f, ok := c.stderr.(*os.File)
	if !ok || (c.quiet != nil && *c.quiet) || !term.IsTerminal(int(f.Fd())) {
		return nil
	}
	opts := []progressbar.Option{
		progressbar.OptionSetWriter(f), progressbar.OptionSetDescription(desc),
		progressbar.OptionThrottle(100 * time.Millisecond), progressbar.OptionClearOnFinish(),
		progressbar.OptionSetWidth(30), progressbar.OptionShowBytes(bytes), progressbar.OptionSpinnerType(14),
	}
	if !bytes {
		opts = append(opts, progressbar.OptionShowCount())
	}
	return &bar{pb: progressbar.NewOptions64(max, opts...)}
}

func (b *bar) Write(p []byte) (int, error) {
	if b != nil {
		b.pb.Add(len(p))
	}
	return len(p), nil
}

func (b *bar) add(n int) {
	if b != nil {
		b.pb.Add(n)
	}
}

func (b *bar) finish() {
	if b != nil {
		b.pb.Finish()
	}
}

// spin shows a spinner with desc while work runs that gives no progress
// of its own (resampling); stop removes it.
func (c *command) spin(desc string) (stop func()) {
	b := c.progress(-1, desc, false)
	if b == nil {
		return func() {}
	}
	done := make(chan struct{})
	go func() {
		t := time.NewTicker(100 * time.Millisecond)
		defer t.Stop()
		for {
			select {
			case <-done:
				return
			case <-t.C:
				b.add(1)
			}
		}
	}()
	return func() { close(done); b.finish() }
}
