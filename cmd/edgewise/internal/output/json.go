package output

import (
	"bytes"
	"encoding/json"
	"io"
	"math"
)

// SchemaID names the JSON format; docs/schema/COMMAND.json describes each
// command's document.
const SchemaID = "edgewise-report/1"

type jsonStamp struct {
	Tool     string   `json:"tool"`
	Command  string   `json:"command"`
	Args     []string `json:"args"`
	Inputs   []Input  `json:"inputs"`
	Seed     *uint64  `json:"seed"`
	TimeUnit *string  `json:"time_unit"`
}

type jsonColumn struct {
	Key         string `json:"key"`
	Label       string `json:"label"`
	Unit        string `json:"unit"`
	MachineOnly bool   `json:"-"`
}

type jsonRow struct {
	Key   string          `json:"key"`
	Label string          `json:"label"`
	Cells json.RawMessage `json:"cells"`
}

type jsonTable struct {
	Key       string       `json:"key"`
	Title     string       `json:"title"`
	RowHeader string       `json:"row_header"`
	Columns   []jsonColumn `json:"columns"`
	Rows      []jsonRow    `json:"rows"`
	Notes     []string     `json:"notes"`
}

type jsonDoc struct {
	Schema  string      `json:"schema"`
	Command string      `json:"command"`
	Stamp   jsonStamp   `json:"stamp"`
	Tables  []jsonTable `json:"tables"`
	Notes   []string    `json:"notes"`
}

// finite returns a pointer to x, or nil when x is infinite or NaN.
func finite(x float64) *float64 {
	if math.IsInf(x, 0) || math.IsNaN(x) {
		return nil
	}
	return &x
}

// cellJSON writes one cell as a JSON object with its fields in a fixed
// order: kind, value, decimals, lower, upper, level, method, text, reason,
// note.
func cellJSON(b *bytes.Buffer, c Cell) {
	put := func(key string, v any, first bool) {
		if !first {
			b.WriteByte(',')
		}
		k, _ := json.Marshal(key)
		b.Write(k)
		b.WriteByte(':')
		x, _ := json.Marshal(v)
		b.Write(x)
	}
	b.WriteByte('{')
	put("kind", c.Kind.String(), true)
	reason := ""
	switch c.Kind {
	case KindNumber, KindCount, KindP, KindFixed:
		v := finite(c.Value)
		if v == nil {
			reason = infReason(c.Value)
		}
		if c.Kind == KindCount && v != nil {
			put("value", int64(*v), false)
		} else {
			put("value", v, false)
		}
		if c.Kind == KindFixed {
			put("decimals", c.Decimals, false)
		}
	case KindZero:
		put("value", 0, false)
	case KindUndefined:
		put("value", nil, false)
		reason = c.Text
	case KindInterval:
		lo, hi := finite(c.Lo), finite(c.Hi)
		put("lower", lo, false)
		put("upper", hi, false)
		put("level", finite(c.Level), false)
		put("method", c.Method, false)
		if lo == nil {
			reason = "lower " + machine(c.Lo)
		}
		if hi == nil {
			if reason != "" {
				reason += ", "
			}
			reason += "upper " + machine(c.Hi)
		}
	case KindText:
		put("text", c.Text, false)
	}
	if reason != "" {
		put("reason", reason, false)
	}
	if c.Note != "" {
		put("note", c.Note, false)
	}
	b.WriteByte('}')
}

func renderJSON(w io.Writer, r *Report) error {
	args := r.Stamp.Args
	if args == nil {
		args = []string{}
	}
	inputs := r.Stamp.Inputs
	if inputs == nil {
		inputs = []Input{}
	}
	doc := jsonDoc{
		Schema:  SchemaID,
		Command: r.Command,
		Stamp:   jsonStamp{Tool: r.Stamp.Tool, Command: r.Command, Args: args, Inputs: inputs, Seed: r.Stamp.Seed},
		Tables:  []jsonTable{},
		Notes:   append([]string{}, r.Notes...),
	}
	if r.Stamp.TimeUnit != "" {
		u := string(r.Stamp.TimeUnit)
		doc.Stamp.TimeUnit = &u
	}
	for _, t := range r.Tables {
		jt := jsonTable{Key: t.Key, Title: t.Title, RowHeader: t.RowHeader, Columns: []jsonColumn{}, Rows: []jsonRow{}, Notes: append([]string{}, t.Notes...)}
		for _, c := range t.Columns {
			jt.Columns = append(jt.Columns, jsonColumn(c))
		}
		for _, row := range t.Rows {
			var b bytes.Buffer
			b.WriteByte('{')
			first := true
			for j, c := range row.Cells {
				if c.Kind == KindEmpty {
					continue
				}
				if !first {
					b.WriteByte(',')
				}
				first = false
				k, _ := json.Marshal(t.Columns[j].Key)
				b.Write(k)
				b.WriteByte(':')
				cellJSON(&b, c)
			}
			b.WriteByte('}')
			jt.Rows = append(jt.Rows, jsonRow{Key: row.Key, Label: row.Label, Cells: b.Bytes()})
		}
		doc.Tables = append(doc.Tables, jt)
	}
	enc := json.NewEncoder(w)
	enc.SetIndent("", " ")
	return enc.Encode(doc)
}
