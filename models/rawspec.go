package models

import (
	"fmt"
	"math"
	"strings"
	"unicode"
)

// The TOML document is first decoded into generic values and then read
// into the raw spec here, key by key, so that a value of the wrong type or
// an unknown key is reported with its full key path (edge[2].rates) and so
// with its line.

// reader reads generic TOML values into typed ones, reporting problems
// through bad.
type reader struct {
	bad func(key, format string, a ...any)
}

func typeName(v any) string {
	switch v.(type) {
	case string:
		return "a string"
	case int64:
		return "an integer"
	case float64:
		return "a number"
	case bool:
		return "true or false"
	case []any, []map[string]any:
		return "a list"
	case map[string]any:
		return "a table"
	}
	return fmt.Sprintf("a %T", v)
}

// known reports keys of tbl not in allowed as unknown.
func (rd reader) known(tbl map[string]any, prefix string, allowed ...string) {
	for _, k := range sortedKeys(tbl) {
		ok := false
		for _, a := range allowed {
			ok = ok || k == a
		}
		if !ok {
			key := k
			if prefix != "" {
				key = prefix + "." + k
			}
			rd.bad(key, "unknown key (known here: %s)", strings.Join(allowed, ", "))
		}
	}
}

func (rd reader) str(v any, key string) (string, bool) {
	s, ok := v.(string)
	if !ok {
		rd.bad(key, "want a string, not %s", typeName(v))
	}
	return s, ok
}

func (rd reader) strs(v any, key string) ([]string, bool) {
	list, ok := v.([]any)
	if !ok {
		rd.bad(key, "want a list of strings, not %s", typeName(v))
		return nil, false
	}
	out := make([]string, len(list))
	for i, x := range list {
		s, ok := x.(string)
		if !ok {
			rd.bad(key, "item %d: want a string, not %s", i+1, typeName(x))
			return nil, false
		}
		out[i] = s
	}
	return out, true
}

// ints reads a non-empty list of integers (edge indices).
func (rd reader) ints(v any, key string) ([]int, bool) {
	list, ok := v.([]any)
	if !ok || len(list) == 0 {
		rd.bad(key, "want a list of edge indices (integers from 0, in the order of the [[edge]] tables), not %s", typeName(v))
		return nil, false
	}
	out := make([]int, len(list))
	for i, x := range list {
		n, ok := x.(int64)
		if !ok || n < 0 || n > math.MaxInt32 {
			rd.bad(key, "item %d: want an edge index (an integer from 0), not %v", i+1, x)
			return nil, false
		}
		out[i] = int(n)
	}
	return out, true
}

func (rd reader) num(v any, key string) (*float64, bool) {
	switch x := v.(type) {
	case float64:
		return &x, true
	case int64:
		f := float64(x)
		return &f, true
	}
	rd.bad(key, "want a number, not %s", typeName(v))
	return nil, false
}

func (rd reader) boolean(v any, key string) bool {
	b, ok := v.(bool)
	if !ok {
		rd.bad(key, "want true or false, not %s", typeName(v))
	}
	return b
}

func (rd reader) table(v any, key string) (map[string]any, bool) {
	t, ok := v.(map[string]any)
	if !ok {
		rd.bad(key, "want a table, not %s", typeName(v))
	}
	return t, ok
}

func (rd reader) tables(v any, key string) ([]map[string]any, bool) {
	switch t := v.(type) {
	case []map[string]any:
		return t, true
	case []any:
		out := make([]map[string]any, len(t))
		for i, x := range t {
			m, ok := x.(map[string]any)
			if !ok {
				rd.bad(fmt.Sprintf("%s[%d]", key, i), "want a table, not %s", typeName(x))
				return nil, false
			}
			out[i] = m
		}
		return out, true
	}
	rd.bad(key, "want [[%s]] tables, not %s", key, typeName(v))
	return nil, false
}

// readRaw reads the decoded document into a rawSpec.
func readRaw(doc map[string]any, bad func(key, format string, a ...any)) rawSpec {
	rd := reader{bad: bad}
	var raw rawSpec
	rd.known(doc, "", "name", "description", "time_unit", "states", "edge", "param", "label", "affinity")
	if v, ok := doc["name"]; ok {
		raw.Name, _ = rd.str(v, "name")
	}
	if v, ok := doc["description"]; ok {
		raw.Description, _ = rd.str(v, "description")
	}
	if v, ok := doc["time_unit"]; ok {
		raw.TimeUnit, _ = rd.str(v, "time_unit")
	}
	if v, ok := doc["states"]; ok {
		raw.States, _ = rd.strs(v, "states")
	}
	if v, ok := doc["edge"]; ok {
		ts, _ := rd.tables(v, "edge")
		for i, t := range ts {
			key := fmt.Sprintf("edge[%d]", i)
			rd.known(t, key, "between", "rates", "labels", "one_way")
			var e rawEdge
			if v, ok := t["between"]; ok {
				e.Between, _ = rd.strs(v, key+".between")
			}
			if v, ok := t["rates"]; ok {
				e.Rates, _ = rd.strs(v, key+".rates")
			}
			if v, ok := t["labels"]; ok {
				e.Labels, _ = rd.strs(v, key+".labels")
			}
			if v, ok := t["one_way"]; ok {
				e.OneWay = rd.boolean(v, key+".one_way")
			}
			raw.Edge = append(raw.Edge, e)
		}
	}
	if v, ok := doc["param"]; ok {
		if t, ok := rd.table(v, "param"); ok {
			raw.Param = map[string]rawParam{}
			for _, name := range sortedKeys(t) {
				key := "param." + name
				pt, ok := rd.table(t[name], key)
				if !ok {
					continue
				}
				rd.known(pt, key, "value", "fixed", "lower", "upper")
				var p rawParam
				if v, ok := pt["value"]; ok {
					p.Value, _ = rd.num(v, key+".value")
				}
				if v, ok := pt["fixed"]; ok {
					p.Fixed = rd.boolean(v, key+".fixed")
				}
				if v, ok := pt["lower"]; ok {
					p.Lower, _ = rd.num(v, key+".lower")
				}
				if v, ok := pt["upper"]; ok {
					p.Upper, _ = rd.num(v, key+".upper")
				}
				raw.Param[name] = p
			}
		}
	}
	if v, ok := doc["label"]; ok {
		if t, ok := rd.table(v, "label"); ok {
			raw.Label = map[string]rawLabel{}
			for _, name := range sortedKeys(t) {
				key := "label." + name
				lt, ok := rd.table(t[name], key)
				if !ok {
					continue
				}
				rd.known(lt, key, "detect")
				var l rawLabel
				if v, ok := lt["detect"]; ok {
					switch v.(type) {
					case string, float64, int64:
						l.Detect = v
					default:
						bad(key+".detect", "want a probability or a parameter name, not %s", typeName(v))
					}
				}
				raw.Label[name] = l
			}
		}
	}
	if v, ok := doc["affinity"]; ok {
		ts, _ := rd.tables(v, "affinity")
		for i, t := range ts {
			key := fmt.Sprintf("affinity[%d]", i)
			rd.known(t, key, "cycle", "edges", "value", "solve")
			var a rawAffinity
			if v, ok := t["cycle"]; ok {
				a.Cycle, _ = rd.strs(v, key+".cycle")
			}
			if v, ok := t["edges"]; ok {
				a.Edges, _ = rd.ints(v, key+".edges")
			}
			if v, ok := t["value"]; ok {
				a.Value, _ = rd.num(v, key+".value")
			}
			if v, ok := t["solve"]; ok {
				a.Solve, _ = rd.str(v, key+".solve")
			}
			raw.Affinity = append(raw.Affinity, a)
		}
	}
	return raw
}

// badName says what is wrong with a state or label name, or "" when it is
// fine. Names travel into records files (CSV and TSV cells, state-trace
// labels "X>Y") and tables, so separators, quotes, line breaks, other
// control characters and surrounding spaces are refused.
func badName(s string) string {
	switch {
	case s == "":
		return "is empty"
	case strings.TrimSpace(s) != s:
		return "starts or ends with a space"
	case strings.HasPrefix(s, "#"):
		return "starts with '#', which marks a comment line in records files"
	case strings.ContainsAny(s, ",\"\t\r\n"):
		return "contains a comma, quote, tab or line break, which records files cannot hold in a cell"
	}
	for _, r := range s {
		if r < 0x20 || r == 0x7f {
			return "contains a control character"
		}
	}
	return ""
}

// minRate is the smallest rate accepted: the smallest normal float64.
// Subnormal numbers lose precision silently.
const minRate = 0x1p-1022

func finitePositive(v float64) bool { return v >= minRate && !math.IsInf(v, 0) }

// goodTimeUnit reports whether u is empty or a unit name of 1 to 16
// letters, digits, '.' or '_' (no spaces or slashes, which would make a
// unit such as 1/ms ambiguous).
func goodTimeUnit(u string) bool {
	if len([]rune(u)) > 16 {
		return false
	}
	for _, r := range u {
		if !unicode.IsLetter(r) && !unicode.IsDigit(r) && r != '.' && r != '_' {
			return false
		}
	}
	return true
}
