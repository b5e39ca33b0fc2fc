package models

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"io"
	"maps"
	"math"
	"slices"
	"strings"

	"github.com/BurntSushi/toml"
)

// Model is a network whose rates are named parameters. The same parameter
// name on two rates ties them. It is read from a TOML spec:
//
//	name = "ring3"
//	time_unit = "ms"         # optional: rates in 1/ms
//	states = ["A", "B", "C"]
//	[[edge]]
//	between = ["A", "B"]     # direction 0 is A->B
//	rates = ["k1", "m1"]     # parameter of A->B and of B->A
//	labels = ["+", "-"]      # visible label per direction, "" = hidden
//	[param.k1]
//	value = 2.0              # start value, or the value when fixed (1/time)
//	fixed = false
//	lower = 0.01             # bounds for fitting (default 0 and +inf)
//	upper = 100
//	[label."+"]
//	detect = 0.95            # detection probability (default 1), or the
//	                         # name of a parameter to fit: detect = "p"
//	[[affinity]]
//	cycle = ["A", "B", "C", "A"]  # a cycle of the network
//	edges = [0, 1, 2]             # optional: the edge of each step
//	value = 4.0                   # its affinity in k_BT
//	solve = "m1"                  # the rate solved from the others
//
// An affinity constraint fixes ln(prod forward rates / prod backward rates)
// along the cycle. It is enforced by computing the solved rate from the
// others, so it holds exactly for every parameter vector; a solved rate is
// neither free nor fixed and has no [param] table.
//
// Parallel edges: two [[edge]] tables may join the same two states (a
// mechanical step and a futile slip; a visible edge and a hidden channel
// beside it; the two halves of a two-state periodic scheme). Each is its
// own channel with its own rate names and labels; only an exact repeat
// (same states, rate names and labels in the same directions) is refused.
// Edges are numbered from 0 in file order, as in the keys edge[0],
// edge[1], ... of error messages. When a step of an affinity cycle joins
// two states that several edges join, the state list does not say which
// edge the cycle takes: edges = [...] then gives the edge index of every
// step (one entry per step, len(cycle) - 1 entries for the closed list).
// A cycle of two states, A-B-A, runs out along one parallel edge and back
// along another: cycle = ["A", "B", "A"], edges = [0, 3].
type Model struct {
	Name        string
	Description string
	// TimeUnit names the unit of time of the rates (key time_unit, e.g.
	// "ms"): rates are in 1/TimeUnit. Empty when the spec does not say.
	TimeUnit   string
	States     []string
	Edges      []EdgeSpec  // in file order: Edges[i] is edge[i] of the spec
	Params     []Param     // declared parameters, sorted by name
	Labels     []LabelSpec // labels, sorted by name
	Affinities []AffinitySpec
}

// EdgeSpec is one edge of a Model.
type EdgeSpec struct {
	Between [2]string // state names; direction 0 is Between[0]->Between[1]
	Rates   [2]string // parameter names; Rates[1] empty only when OneWay
	Labels  [2]string // visible labels, "" for hidden
	OneWay  bool      // a declared irreversible edge (Rates[1] absent)
}

// ParamKind says what a parameter is.
type ParamKind int

const (
	RateParam   ParamKind = iota // a rate in 1/time, > 0
	DetectParam                  // a detection probability in (0, 1]
)

// Param is a named parameter: a rate in 1/time, or a detection probability.
type Param struct {
	Name  string
	Kind  ParamKind
	Value float64 // start value, or the value when Fixed
	Fixed bool
	// Lower and Upper bound the value when it is fitted. Defaults: 0 and
	// +Inf for a rate, 0 and 1 for a detection probability. The value is
	// always > 0, so a lower bound of 0 is open.
	Lower, Upper float64
}

// LabelSpec is a visible label of a Model: a fixed detection probability,
// or the name of a DetectParam parameter.
type LabelSpec struct {
	Name   string
	Detect float64 // used when Param is ""
	Param  string
}

// AffinitySpec is a cycle-affinity constraint.
type AffinitySpec struct {
	Cycle []string // states of a cycle, closed: Cycle[0] == Cycle[len-1]
	// Edges, when not nil, gives the index into Model.Edges of every step
	// (len(Cycle) - 1 entries): needed when a step joins two states that
	// parallel edges join, optional (and checked) otherwise.
	Edges []int
	Value float64 // affinity in k_BT
	Solve string  // the rate parameter computed from the constraint
}

// SpecError is one problem in a model spec, located by file, line and key.
type SpecError struct {
	File string
	Line int // 1-based; 0 when unknown
	Key  string
	Msg  string
}

func (e *SpecError) Error() string {
	loc := e.File
	if e.Line > 0 {
		loc += fmt.Sprintf(":%d", e.Line)
	}
	if e.Key != "" {
		return fmt.Sprintf("%s: %s: %s", loc, e.Key, e.Msg)
	}
	return fmt.Sprintf("%s: %s", loc, e.Msg)
}

type rawSpec struct {
	Name        string              `toml:"name"`
	Description string              `toml:"description"`
	TimeUnit    string              `toml:"time_unit"`
	States      []string            `toml:"states"`
	Edge        []rawEdge           `toml:"edge"`
	Param       map[string]rawParam `toml:"param"`
	Label       map[string]rawLabel `toml:"label"`
	Affinity    []rawAffinity       `toml:"affinity"`
}

type rawAffinity struct {
	Cycle []string `toml:"cycle"`
	Edges []int    `toml:"edges"`
	Value *float64 `toml:"value"`
	Solve string   `toml:"solve"`
}

type rawEdge struct {
	Between []string `toml:"between"`
	Rates   []string `toml:"rates"`
	Labels  []string `toml:"labels"`
	OneWay  bool     `toml:"one_way"`
}

type rawParam struct {
	Value *float64 `toml:"value"`
	Fixed bool     `toml:"fixed"`
	Lower *float64 `toml:"lower"`
	Upper *float64 `toml:"upper"`
}

type rawLabel struct {
	Detect any `toml:"detect"` // a number, or a parameter name
}

// Parse reads a TOML model spec; file names the source in errors. Each
// problem is a *SpecError with file, line and key, and all problems of the
// spec's text are returned together; the checks that need a well-formed
// spec (affinity constraints, strong connectivity) run once the rest is
// clean.
func Parse(r io.Reader, file string) (*Model, error) {
	src, err := io.ReadAll(io.LimitReader(r, MaxSpecBytes+1))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", file, err)
	}
	if err := checkSpecText(src, file); err != nil {
		return nil, err
	}
	var doc map[string]any
	if _, err := toml.NewDecoder(bytes.NewReader(src)).Decode(&doc); err != nil {
		var pe toml.ParseError
		if errors.As(err, &pe) {
			return nil, &SpecError{File: file, Line: pe.Position.Line, Msg: pe.Message}
		}
		return nil, &SpecError{File: file, Msg: err.Error()}
	}
	loc := locate(src)
	if err := checkSpecNames(doc, file, loc); err != nil {
		return nil, err
	}
	var errs []error
	bad := func(key, format string, a ...any) {
		errs = append(errs, &SpecError{File: file, Line: loc.line(key), Key: key, Msg: fmt.Sprintf(format, a...)})
	}
	raw := readRaw(doc, bad)
	m := &Model{Name: raw.Name, Description: raw.Description, TimeUnit: raw.TimeUnit, States: raw.States}
	if !goodTimeUnit(raw.TimeUnit) {
		bad("time_unit", "%q: want 1 to 16 letters or digits, e.g. \"ms\"", raw.TimeUnit)
	}
	index := map[string]int{}
	for i, s := range raw.States {
		if why := badName(s); why != "" {
			bad("states", "state name %q %s", s, why)
		}
		if _, dup := index[s]; dup {
			bad("states", "state %q listed twice", s)
		}
		index[s] = i
	}
	if len(raw.States) < 2 {
		bad("states", "need at least two states")
	}
	used := map[string]bool{}
	usedLabel := map[string]bool{}
	type edgeKey struct{ between, rates, labels [2]string }
	repeats := map[edgeKey]int{}
	for i, e := range raw.Edge {
		key := fmt.Sprintf("edge[%d]", i)
		var es EdgeSpec
		es.OneWay = e.OneWay
		if len(e.Between) != 2 {
			bad(key+".between", "needs exactly two states")
			continue
		}
		copy(es.Between[:], e.Between)
		for _, s := range e.Between {
			if _, ok := index[s]; !ok {
				bad(key+".between", "unknown state %q", s)
			}
		}
		if e.Between[0] == e.Between[1] {
			bad(key+".between", "self-loop at state %q", e.Between[0])
		}
		want := 2
		if e.OneWay {
			want = 1
		}
		if len(e.Rates) != want {
			bad(key+".rates", "needs %d parameter names (one per direction%s)", want, map[bool]string{true: "; one_way edges have one", false: ""}[e.OneWay])
			continue
		}
		copy(es.Rates[:], e.Rates)
		for _, r := range e.Rates {
			if r == "" {
				bad(key+".rates", "empty parameter name")
			}
			used[r] = true
		}
		if len(e.Labels) > 2 {
			bad(key+".labels", "at most one label per direction")
		} else {
			copy(es.Labels[:], e.Labels)
		}
		if es.OneWay && es.Labels[1] != "" {
			bad(key+".labels", "a one-way edge has no backward direction to label")
		}
		for _, l := range es.Labels {
			if l == "" {
				continue
			}
			if why := badName(l); why != "" {
				bad(key+".labels", "label %q %s", l, why)
			} else if l == "end" {
				bad(key+".labels", "label \"end\" is reserved: in records files a row labelled end gives the record's end time")
			}
			usedLabel[l] = true
		}
		// Parallel edges are distinct channels; an edge that repeats
		// another in every respect (read in either direction) is a slip
		// of the pen: the two would act as one channel of twice the rate.
		ek := edgeKey{es.Between, es.Rates, es.Labels}
		if !es.OneWay {
			rk := edgeKey{[2]string{es.Between[1], es.Between[0]}, [2]string{es.Rates[1], es.Rates[0]}, [2]string{es.Labels[1], es.Labels[0]}}
			if rk.between[0] < ek.between[0] {
				ek = rk
			}
		}
		if j, dup := repeats[ek]; dup {
			bad(key, "repeats edge[%d] (%s-%s): same states, rate names and labels; a parallel channel needs its own rate names (one edge with the summed rate is the same model)", j, es.Between[0], es.Between[1])
		} else {
			repeats[ek] = i
		}
		m.Edges = append(m.Edges, es)
	}
	if len(raw.Edge) == 0 {
		bad("edge", "no edges")
	}
	// Labels first: a label's detect may name a parameter.
	detectParam := map[string]string{} // parameter -> label
	for _, name := range sortedKeys(raw.Label) {
		if !usedLabel[name] {
			bad("label."+name, "label is declared but no edge carries it")
		}
	}
	for _, name := range sortedKeys(usedLabel) {
		key := "label." + name + ".detect"
		ls := LabelSpec{Name: name, Detect: 1}
		if l, ok := raw.Label[name]; ok && l.Detect != nil {
			switch d := l.Detect.(type) {
			case float64:
				ls.Detect = d
			case int64:
				ls.Detect = float64(d)
			case string:
				ls.Param, ls.Detect = d, 0
			default:
				bad(key, "want a probability or a parameter name, not %T", l.Detect)
			}
			if ls.Param == "" && !(ls.Detect > 0 && ls.Detect <= 1) {
				bad(key, "detection probability %g is not in (0, 1]", ls.Detect)
			}
			if ls.Param != "" {
				if used[ls.Param] {
					bad(key, "parameter %q is already a rate; a detection probability needs its own", ls.Param)
				} else if _, dup := detectParam[ls.Param]; !dup {
					detectParam[ls.Param] = name // labels may share one
				}
			}
		}
		m.Labels = append(m.Labels, ls)
	}
	solved := map[string]int{}
	for i, a := range raw.Affinity {
		if a.Solve != "" {
			if _, dup := solved[a.Solve]; !dup {
				solved[a.Solve] = i
			}
		}
	}
	for _, name := range sortedKeys(raw.Param) {
		p := raw.Param[name]
		key := "param." + name
		kind := RateParam
		if _, ok := detectParam[name]; ok {
			kind = DetectParam
		} else if !used[name] {
			bad(key, "parameter is declared but no rate or detection uses it")
		}
		if i, ok := solved[name]; ok {
			bad(key, "parameter is solved from affinity[%d] and takes no [param] table", i)
			continue
		}
		if p.Value == nil {
			bad(key, "missing value")
			continue
		}
		q := Param{Name: name, Kind: kind, Value: *p.Value, Fixed: p.Fixed, Lower: 0, Upper: math.Inf(1)}
		if kind == DetectParam {
			q.Upper = 1
		}
		if p.Lower != nil {
			q.Lower = *p.Lower
		}
		if p.Upper != nil {
			q.Upper = *p.Upper
		}
		v := q.Value
		switch {
		case kind == RateParam && !finitePositive(v):
			bad(key+".value", "rate %g is not a finite positive number of normal size (at least %g)", v, minRate)
		case kind == DetectParam && !(v > 0 && v <= 1):
			bad(key+".value", "detection probability %g is not in (0, 1]", v)
		case math.IsNaN(q.Lower) || q.Lower < 0 || math.IsInf(q.Lower, 0):
			bad(key+".lower", "lower bound %g is not a finite number >= 0", q.Lower)
		case math.IsNaN(q.Upper) || q.Upper <= q.Lower || (kind == DetectParam && q.Upper > 1):
			bad(key+".upper", "upper bound %g is not above the lower bound %g%s", q.Upper, q.Lower, map[bool]string{true: " and at most 1", false: ""}[kind == DetectParam])
		case !q.Fixed && (v < q.Lower || v > q.Upper):
			bad(key+".value", "start value %g is outside the bounds [%g, %g]", v, q.Lower, q.Upper)
		}
		m.Params = append(m.Params, q)
	}
	for _, name := range sortedKeys(used) {
		if _, ok := raw.Param[name]; !ok {
			if _, ok := solved[name]; !ok {
				bad("param", "rate parameter %q is used by an edge but has no [param.%s] value", name, name)
			}
		}
	}
	for _, name := range sortedKeys(detectParam) {
		if _, ok := raw.Param[name]; !ok {
			bad("label."+detectParam[name]+".detect", "detection parameter %q has no [param.%s] value", name, name)
		}
	}
	if len(errs) == 0 {
		for i, a := range raw.Affinity {
			key := fmt.Sprintf("affinity[%d]", i)
			as := AffinitySpec{Cycle: a.Cycle, Edges: a.Edges, Solve: a.Solve}
			if a.Value == nil {
				bad(key, "missing value (the cycle affinity in k_BT)")
				continue
			}
			as.Value = *a.Value
			if math.IsNaN(as.Value) || math.IsInf(as.Value, 0) {
				bad(key+".value", "affinity %g is not a finite number", as.Value)
			}
			if n := len(as.Cycle); n > 0 && as.Cycle[0] != as.Cycle[n-1] {
				as.Cycle = append(slices.Clip(as.Cycle), as.Cycle[0])
			}
			m.Affinities = append(m.Affinities, as)
		}
		for _, ce := range m.checkAffinities() {
			bad(fmt.Sprintf("affinity[%d].%s", ce.index, ce.field), "%s", ce.msg)
		}
	}
	if len(usedLabel) == 0 {
		bad("edge", "no visible label: at least one direction of one edge must carry a label")
	}
	if len(errs) == 0 {
		net, err := m.Network(m.Start())
		var se *SolveError
		if errors.As(err, &se) {
			bad(fmt.Sprintf("affinity[%d].value", se.Index), "%s at the start values", se.Msg)
		} else if err != nil {
			errs = append(errs, &SpecError{File: file, Msg: err.Error()})
		} else if err := net.Validate(); err != nil {
			errs = append(errs, &SpecError{File: file, Msg: err.Error()})
		}
	}
	if len(errs) > 0 {
		return nil, errors.Join(errs...)
	}
	return m, nil
}

// Free returns the names of the parameters that are not fixed, in the
// order of Model.Params.
func (m *Model) Free() []string {
	var f []string
	for _, p := range m.Params {
		if !p.Fixed {
			f = append(f, p.Name)
		}
	}
	return f
}

// Start returns the start values of the free parameters.
func (m *Model) Start() []float64 {
	var x []float64
	for _, p := range m.Params {
		if !p.Fixed {
			x = append(x, p.Value)
		}
	}
	return x
}

// Network returns the numeric network for free-parameter values x (in the
// order of Free: rates in 1/time, detection probabilities); fixed
// parameters keep their values, a tied name gives every rate that carries it
// the same value, and each affinity-solved rate is computed so that its
// constraint holds exactly.
func (m *Model) Network(x []float64) (*Network, error) {
	val, err := m.values(x)
	if err != nil {
		return nil, err
	}
	idx := map[string]int{}
	for i, s := range m.States {
		idx[s] = i
	}
	lab := map[string]int{}
	net := &Network{States: append([]string(nil), m.States...)}
	for i, l := range m.Labels {
		lab[l.Name] = i
		d := l.Detect
		if l.Param != "" {
			d = val[l.Param]
		}
		net.Labels = append(net.Labels, Label{Name: l.Name, Detect: d})
	}
	for _, e := range m.Edges {
		ne := Edge{From: idx[e.Between[0]], To: idx[e.Between[1]], Label: [2]int{Hidden, Hidden}}
		for d := 0; d < 2; d++ {
			if d == 1 && e.OneWay {
				continue
			}
			v, ok := val[e.Rates[d]]
			if !ok {
				return nil, fmt.Errorf("model %s: rate parameter %q has no value", m.Name, e.Rates[d])
			}
			ne.Rate[d] = v
			if l := e.Labels[d]; l != "" {
				ne.Label[d] = lab[l]
			}
		}
		net.Edges = append(net.Edges, ne)
	}
	return net, nil
}

// locator maps dotted key paths ("edge[1].rates", "param.k1.value") to the
// 1-based line where they are written.
type locator map[string]int

func (l locator) line(key string) int {
	for key != "" {
		if n, ok := l[key]; ok {
			return n
		}
		i := strings.LastIndexAny(key, ".[")
		if i < 0 {
			break
		}
		key = key[:i]
	}
	return 0
}

func locate(src []byte) locator {
	l := locator{}
	sc := bufio.NewScanner(bytes.NewReader(src))
	sc.Buffer(make([]byte, 0, 64*1024), 1<<20)
	table := ""
	counts := map[string]int{}
	for n := 1; sc.Scan(); n++ {
		s := strings.TrimSpace(stripComment(sc.Text()))
		switch {
		case strings.HasPrefix(s, "[["):
			name := unquote(strings.TrimSuffix(strings.TrimPrefix(s, "[["), "]]"))
			table = fmt.Sprintf("%s[%d]", name, counts[name])
			counts[name]++
		case strings.HasPrefix(s, "["):
			end := strings.LastIndex(s, "]")
			if end < 0 {
				continue
			}
			table = unquote(s[1:end])
		default:
			eq := strings.Index(s, "=")
			if eq <= 0 || strings.HasPrefix(s, "#") {
				continue
			}
			key := unquote(strings.TrimSpace(s[:eq]))
			if table != "" {
				key = table + "." + key
			}
			if _, ok := l[key]; !ok {
				l[key] = n
			}
			continue
		}
		if _, ok := l[table]; !ok {
			l[table] = n
		}
	}
	return l
}

// stripComment removes a TOML comment (a '#' outside quotes) from a line.
func stripComment(s string) string {
	var quote rune
	for i, r := range s {
		switch {
		case quote != 0:
			if r == quote {
				quote = 0
			}
		case r == '"' || r == '\'':
			quote = r
		case r == '#':
			return s[:i]
		}
	}
	return s
}

func unquote(s string) string {
	s = strings.TrimSpace(s)
	return strings.NewReplacer(`"`, "", `'`, "", " ", "").Replace(s)
}

func sortedKeys[V any](m map[string]V) []string { return slices.Sorted(maps.Keys(m)) }
