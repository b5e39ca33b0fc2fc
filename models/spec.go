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
//	states = ["A", "B", "C"]
//	[[edge]]
//	between = ["A", "B"]     # direction 0 is A->B
//	rates = ["k1", "m1"]     # parameter of A->B and of B->A
//	labels = ["+", "-"]      # visible label per direction, "" = hidden
//	[param.k1]
//	value = 2.0              # start value, or the value when fixed (1/time)
//	fixed = false
//	[label."+"]
//	detect = 0.95            # detection probability, default 1
type Model struct {
	Name        string
	Description string
	States      []string
	Edges       []EdgeSpec
	Params      []Param
	Labels      []Label
}

// EdgeSpec is one edge of a Model.
type EdgeSpec struct {
	Between [2]string // state names; direction 0 is Between[0]->Between[1]
	Rates   [2]string // parameter names; Rates[1] empty only when OneWay
	Labels  [2]string // visible labels, "" for hidden
	OneWay  bool      // a declared irreversible edge (Rates[1] absent)
}

// Param is a named rate parameter in 1/time.
type Param struct {
	Name  string
	Value float64
	Fixed bool
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
	States      []string            `toml:"states"`
	Edge        []rawEdge           `toml:"edge"`
	Param       map[string]rawParam `toml:"param"`
	Label       map[string]rawLabel `toml:"label"`
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
}

type rawLabel struct {
	Detect *float64 `toml:"detect"`
}

// Parse reads a TOML model spec; file names the source in errors. All
// problems found are returned together, each as a *SpecError.
func Parse(r io.Reader, file string) (*Model, error) {
	src, err := io.ReadAll(r)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", file, err)
	}
	var raw rawSpec
	md, err := toml.NewDecoder(bytes.NewReader(src)).Decode(&raw)
	if err != nil {
		var pe toml.ParseError
		if errors.As(err, &pe) {
			return nil, &SpecError{File: file, Line: pe.Position.Line, Msg: pe.Message}
		}
		return nil, &SpecError{File: file, Msg: err.Error()}
	}
	loc := locate(src)
	var errs []error
	bad := func(key, format string, a ...any) {
		errs = append(errs, &SpecError{File: file, Line: loc.line(key), Key: key, Msg: fmt.Sprintf(format, a...)})
	}
	for _, k := range md.Undecoded() {
		bad(k.String(), "unknown key")
	}
	m := &Model{Name: raw.Name, Description: raw.Description, States: raw.States}
	index := map[string]int{}
	for i, s := range raw.States {
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
	pairs := map[[2]string]int{}
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
		pk := [2]string{min(e.Between[0], e.Between[1]), max(e.Between[0], e.Between[1])}
		if j, dup := pairs[pk]; dup {
			bad(key+".between", "duplicate of edge %d (%s-%s)", j+1, pk[0], pk[1])
		}
		pairs[pk] = i
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
			if l != "" {
				usedLabel[l] = true
			}
		}
		m.Edges = append(m.Edges, es)
	}
	if len(raw.Edge) == 0 {
		bad("edge", "no edges")
	}
	for _, name := range sortedKeys(raw.Param) {
		p := raw.Param[name]
		key := "param." + name
		if !used[name] {
			bad(key, "parameter is declared but no rate uses it")
		}
		if p.Value == nil {
			bad(key, "missing value")
			continue
		}
		if v := *p.Value; !(v > 0) || math.IsInf(v, 0) {
			bad(key+".value", "rate %g is not a finite positive number", v)
		}
		m.Params = append(m.Params, Param{Name: name, Value: *p.Value, Fixed: p.Fixed})
	}
	for _, name := range sortedKeys(used) {
		if _, ok := raw.Param[name]; !ok {
			bad("param", "rate parameter %q is used by an edge but has no [param.%s] value", name, name)
		}
	}
	for _, name := range sortedKeys(raw.Label) {
		key := "label." + name
		if !usedLabel[name] {
			bad(key, "label is declared but no edge carries it")
		}
	}
	for _, name := range sortedKeys(usedLabel) {
		d := 1.0
		if l, ok := raw.Label[name]; ok && l.Detect != nil {
			d = *l.Detect
			if !(d > 0 && d <= 1) {
				bad("label."+name+".detect", "detection probability %g is not in (0, 1]", d)
			}
		}
		m.Labels = append(m.Labels, Label{Name: name, Detect: d})
	}
	if len(usedLabel) == 0 {
		bad("edge", "no visible label: at least one direction of one edge must carry a label")
	}
	if len(errs) == 0 {
		net, err := m.Network(m.Start())
		if err != nil {
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
// order of Free, 1/time); fixed parameters keep their values and a tied
// name gives every rate that carries it the same value.
func (m *Model) Network(x []float64) (*Network, error) {
	free := m.Free()
	if len(x) != len(free) {
		return nil, fmt.Errorf("model %s: %d free parameter values, want %d", m.Name, len(x), len(free))
	}
	val := map[string]float64{}
	k := 0
	for _, p := range m.Params {
		if p.Fixed {
			val[p.Name] = p.Value
		} else {
			val[p.Name] = x[k]
			k++
		}
	}
	idx := map[string]int{}
	for i, s := range m.States {
		idx[s] = i
	}
	lab := map[string]int{}
	for i, l := range m.Labels {
		lab[l.Name] = i
	}
	net := &Network{States: append([]string(nil), m.States...), Labels: append([]Label(nil), m.Labels...)}
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
		s := strings.TrimSpace(sc.Text())
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

func unquote(s string) string {
	s = strings.TrimSpace(s)
	return strings.NewReplacer(`"`, "", `'`, "", " ", "").Replace(s)
}

func sortedKeys[V any](m map[string]V) []string { return slices.Sorted(maps.Keys(m)) }
