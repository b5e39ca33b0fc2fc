package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"edgewise/cmd/edgewise/internal/output"
	"edgewise/infer"

	"github.com/spf13/pflag"
)

// Part files. `compare --shard i/N` writes, instead of the report, a JSON
// part file: the set-up every shard shares (tool version, the inputs'
// sha256, the options that can change a number, the candidate list) and
// the summaries of its candidates (those with index j, j mod N = i - 1,
// in the order of the candidate list). With --fits PARTS a shard runs
// bootstrap replicates b with b mod N = i - 1 instead, for the two best
// candidates of the joined parts. `merge` joins the parts into the report
// a single run prints.

// partFormat names the format of part files; a reader refuses others.
const partFormat = "edgewise compare part 1"

// Part kinds.
const (
	partCandidates = "candidates"
	partBootstrap  = "bootstrap"
)

// comparePart is one part file.
type comparePart struct {
	Format  string      `json:"format"`
	Kind    string      `json:"kind"`
	Shard   int         `json:"shard"` // 1-based
	Of      int         `json:"of"`
	Setup   partSetup   `json:"setup"`
	Summary *cmpSummary `json:"summary,omitempty"`
	Boot    *bootPart   `json:"bootstrap,omitempty"`
	path    string      // the file it was read from
}

// partSetup is what every part of one comparison shares; merge refuses
// parts whose set-ups differ.
type partSetup struct {
	Tool string `json:"tool"`
	// Args is the command line after "compare", without the options that
	// say only where and how to write and how to split the work (stampArgs).
	Args   []string       `json:"args"`
	Inputs []output.Input `json:"inputs"`
	Seed   uint64         `json:"seed"`
	// TimeUnit of the report; "" when unnamed.
	TimeUnit string `json:"time_unit"`
	// Options lists name=value for every option that can change a number
	// of the report (all but --shard, --fits, --bootstrap, --workers and
	// the output options), defaults included.
	Options []string `json:"options"`
	// Candidates names every candidate, in order.
	Candidates []string `json:"candidates"`
	// Notes are the report's notes made before any fit.
	Notes []string `json:"notes"`
	// Bootstrap is the number of bootstrap replicates asked for.
	Bootstrap int `json:"bootstrap"`
}

// bootPart is a bootstrap part's replicates.
type bootPart struct {
	Best     string   `json:"best"`   // the alternative: best by BIC
	Second   string   `json:"second"` // the null: second best, simulated from
	Observed jnum     `json:"observed"`
	Index    []int    `json:"index"`
	LR       []jnum   `json:"lr"`
	Errors   []string `json:"errors"`
	// Interrupted: the replicates were stopped early.
	Interrupted bool `json:"interrupted"`
}

// outputOnly are the options of compare that say only where and how to
// write or how to split the work; the stamp's args and the options
// fingerprint leave them out.
var outputOnly = map[string]bool{"shard": true, "fits": true, "output": true, "format": true, "force": true, "quiet": true, "report": true}

// notNumbers are further options that change no number of the report:
// the worker count (results do not depend on it) and the bootstrap's
// replicate count (checked on the bootstrap parts by themselves).
var notNumbers = map[string]bool{"workers": true, "bootstrap": true}

// stampArgs returns args without the output-only options and their
// values, for the report's stamp: so that a merge of shards and a single
// run stamp the same command line.
func stampArgs(fs *pflag.FlagSet, args []string) []string {
	out := []string{}
	for i := 0; i < len(args); i++ {
		a := args[i]
		if a == "--" {
			out = append(out, args[i:]...)
			break
		}
		var f *pflag.Flag
		inline := false
		switch {
		case strings.HasPrefix(a, "--"):
			name, _, eq := strings.Cut(a[2:], "=")
			f, inline = fs.Lookup(name), eq
		case strings.HasPrefix(a, "-") && len(a) >= 2:
			f = fs.ShorthandLookup(a[1:2])
			inline = len(a) > 2
		}
		if f == nil || !outputOnly[f.Name] {
			out = append(out, a)
			continue
		}
		if !inline && f.NoOptDefVal == "" {
			i++ // the value
		}
	}
	return out
}

// optionList returns name=value for every option that can change a
// number of the report, sorted by name.
func optionList(fs *pflag.FlagSet) []string {
	var out []string
	fs.VisitAll(func(f *pflag.Flag) {
		if !outputOnly[f.Name] && !notNumbers[f.Name] {
			out = append(out, f.Name+"="+f.Value.String())
		}
	})
	return out
}

// writePart writes a part file as indented JSON.
func writePart(w io.Writer, p *comparePart) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", " ")
	return enc.Encode(p)
}

// readPart reads one part file.
func readPart(path string) (*comparePart, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	var p comparePart
	dec := json.NewDecoder(bytes.NewReader(b))
	if err := dec.Decode(&p); err != nil {
		return nil, fmt.Errorf("%s: not a compare part file: %v", path, err)
	}
	if p.Format != partFormat {
		if p.Format == "" {
			return nil, fmt.Errorf("%s: not a compare part file (no format field; write parts with edgewise compare --shard i/N)", path)
		}
		return nil, fmt.Errorf("%s: part format %q, this edgewise (%s) reads %q", path, p.Format, version, partFormat)
	}
	switch {
	case p.Of < 1 || p.Shard < 1 || p.Shard > p.Of:
		return nil, fmt.Errorf("%s: shard %d/%d out of range", path, p.Shard, p.Of)
	case p.Kind == partCandidates && p.Summary == nil, p.Kind == partBootstrap && p.Boot == nil:
		return nil, fmt.Errorf("%s: %s part without its content", path, p.Kind)
	case p.Kind != partCandidates && p.Kind != partBootstrap:
		return nil, fmt.Errorf("%s: unknown part kind %q", path, p.Kind)
	}
	p.path = path
	return &p, nil
}

// readParts reads part files named by paths; each may be a glob pattern.
func readParts(paths []string) ([]*comparePart, error) {
	var names []string
	for _, p := range paths {
		if strings.ContainsAny(p, "*?[") {
			m, err := filepath.Glob(p)
			if err != nil {
				return nil, fmt.Errorf("%s: %w", p, err)
			}
			if len(m) == 0 {
				return nil, fmt.Errorf("%s: no file matches", p)
			}
			names = append(names, m...)
			continue
		}
		names = append(names, p)
	}
	var parts []*comparePart
	for _, n := range names {
		p, err := readPart(n)
		if err != nil {
			return nil, err
		}
		parts = append(parts, p)
	}
	return parts, nil
}

// sameSetup reports how b's set-up differs from a's ("" when it does
// not), in the terms a user can act on.
func sameSetup(a, b *partSetup) string {
	switch {
	case a.Tool != b.Tool:
		return fmt.Sprintf("written by %s and %s", a.Tool, b.Tool)
	case len(a.Inputs) != len(b.Inputs):
		return fmt.Sprintf("%d and %d input files", len(a.Inputs), len(b.Inputs))
	}
	for i := range a.Inputs {
		if a.Inputs[i].SHA256 != b.Inputs[i].SHA256 {
			return fmt.Sprintf("different inputs: %s (sha256 %.12s) and %s (sha256 %.12s)", a.Inputs[i].Name, a.Inputs[i].SHA256, b.Inputs[i].Name, b.Inputs[i].SHA256)
		}
	}
	if !slices.Equal(a.Options, b.Options) {
		for i := range min(len(a.Options), len(b.Options)) {
			if a.Options[i] != b.Options[i] {
				return fmt.Sprintf("different options: --%s and --%s", a.Options[i], b.Options[i])
			}
		}
		return "different options"
	}
	if !slices.Equal(a.Candidates, b.Candidates) {
		return fmt.Sprintf("different candidate lists (%d and %d candidates)", len(a.Candidates), len(b.Candidates))
	}
	if a.TimeUnit != b.TimeUnit || a.Seed != b.Seed || !slices.Equal(a.Notes, b.Notes) {
		return "different time units, seeds or notes"
	}
	return ""
}

// checkShards checks that parts (of one kind) are shards 1..N of one N,
// each once.
func checkShards(kind string, parts []*comparePart) error {
	n := parts[0].Of
	by := map[int]string{}
	for _, p := range parts {
		if p.Of != n {
			return fmt.Errorf("%s parts of different splits: %s is shard %d/%d, %s is shard %d/%d", kind, parts[0].path, parts[0].Shard, n, p.path, p.Shard, p.Of)
		}
		if prev, ok := by[p.Shard]; ok {
			return fmt.Errorf("%s shard %d/%d given twice: %s and %s", kind, p.Shard, n, prev, p.path)
		}
		by[p.Shard] = p.path
	}
	var missing []string
	for i := 1; i <= n; i++ {
		if _, ok := by[i]; !ok {
			missing = append(missing, fmt.Sprintf("%d/%d", i, n))
		}
	}
	if len(missing) > 0 {
		return fmt.Errorf("missing %s shard(s) %s", kind, strings.Join(missing, ", "))
	}
	return nil
}

// assemble joins parts into the ranked view and the set-up of the
// report: every candidate part of one split (and, when given, every
// bootstrap part of one split), all of one set-up. It is the one route
// from summaries to the report, for a single run and for a merge. A
// merge refuses an interrupted part; a single run (partial) shows the
// candidates finished before the interrupt.
func assemble(parts []*comparePart, partial bool) (*partSetup, *cmpView, error) {
	if len(parts) == 0 {
		return nil, nil, fmt.Errorf("no part files")
	}
	var cand, boot []*comparePart
	for _, p := range parts {
		if d := sameSetup(&parts[0].Setup, &p.Setup); d != "" {
			return nil, nil, fmt.Errorf("%s and %s do not belong to one comparison: %s", parts[0].path, p.path, d)
		}
		if p.Kind == partCandidates {
			cand = append(cand, p)
		} else {
			boot = append(boot, p)
		}
	}
	if len(cand) == 0 {
		return nil, nil, fmt.Errorf("no candidate parts: only bootstrap parts given")
	}
	slices.SortFunc(cand, func(a, b *comparePart) int { return a.Shard - b.Shard })
	if err := checkShards("candidate", cand); err != nil {
		return nil, nil, err
	}
	ev, err := json.Marshal(cand[0].Summary.Evidence)
	if err != nil {
		return nil, nil, err
	}
	var all []candSummary
	interrupted := false
	for _, p := range cand {
		interrupted = interrupted || p.Summary.Interrupted
		if p.Summary.Interrupted && !partial {
			return nil, nil, fmt.Errorf("%s: shard %d/%d was interrupted before all its candidates were fitted: run it again", p.path, p.Shard, p.Of)
		}
		e, err := json.Marshal(p.Summary.Evidence)
		if err != nil {
			return nil, nil, err
		}
		if !bytes.Equal(e, ev) {
			return nil, nil, fmt.Errorf("%s and %s disagree on the records' own statistics although their inputs and options agree", cand[0].path, p.path)
		}
		for _, c := range p.Summary.Candidates {
			if c.Index < 0 || c.Index >= len(p.Setup.Candidates) || c.Index%p.Of != p.Shard-1 || p.Setup.Candidates[c.Index] != c.Name {
				return nil, nil, fmt.Errorf("%s: candidate %d (%s) does not belong to shard %d/%d", p.path, c.Index, c.Name, p.Shard, p.Of)
			}
		}
		all = append(all, p.Summary.Candidates...)
	}
	if len(all) != len(cand[0].Setup.Candidates) && !interrupted {
		return nil, nil, fmt.Errorf("the parts hold %d of the %d candidates", len(all), len(cand[0].Setup.Candidates))
	}
	v, err := rankSummary(cand[0].Summary.Evidence, all, interrupted)
	if err != nil {
		return nil, nil, err
	}
	setup := cand[0].Setup
	if len(boot) > 0 {
		slices.SortFunc(boot, func(a, b *comparePart) int { return a.Shard - b.Shard })
		if err := checkShards("bootstrap", boot); err != nil {
			return nil, nil, err
		}
		bv, err := joinBootstrap(v, boot)
		if err != nil {
			return nil, nil, err
		}
		v.Boot = bv
		setup = boot[0].Setup
	} else if _, _, _, ok := bootPairOf(v); setup.Bootstrap > 0 && !partial && !ok {
		v.Boot = &bootView{Note: fmt.Sprintf("the bootstrap (%d replicates) was not run: it needs two fitted candidates", setup.Bootstrap)}
	} else if setup.Bootstrap > 0 && !partial {
		v.Boot = &bootView{Note: fmt.Sprintf("the bootstrap (%d replicates) is still to run: edgewise compare with the same arguments and --shard i/M --fits 'PARTS' writes its parts; merge them with these", setup.Bootstrap)}
	}
	return &setup, v, nil
}

// compareReport makes the report of an assembled comparison.
func compareReport(s *partSetup, v *cmpView) *output.Report {
	seed := s.Seed
	r := &output.Report{Command: "compare", Stamp: output.Stamp{Tool: s.Tool, Args: s.Args, Inputs: s.Inputs, Seed: &seed, TimeUnit: output.TimeUnit(s.TimeUnit)}}
	r.Notes = append(r.Notes, s.Notes...)
	compareTables(r, v, output.TimeUnit(s.TimeUnit))
	return r
}

// parseShard parses --shard i/N: 1-based, 1 <= i <= N <= maxShards.
func parseShard(s string) (infer.Shard, error) {
	a, b, ok := strings.Cut(s, "/")
	i, err1 := strconv.Atoi(strings.TrimSpace(a))
	n, err2 := strconv.Atoi(strings.TrimSpace(b))
	if !ok || err1 != nil || err2 != nil {
		return infer.Shard{}, fmt.Errorf("--shard %q: want i/N, e.g. 1/4 (shards are numbered from 1, as SLURM array tasks --array=1-N)", s)
	}
	if n < 1 || n > maxShards {
		return infer.Shard{}, fmt.Errorf("--shard %q: N = %d: want 1 to %d shards", s, n, maxShards)
	}
	if i < 1 || i > n {
		return infer.Shard{}, fmt.Errorf("--shard %q: shard %d out of range: want 1 to %d (shards are numbered from 1)", s, i, n)
	}
	return infer.Shard{Index: i - 1, Of: n}, nil
}

// maxShards bounds N in --shard i/N.
const maxShards = 100000
