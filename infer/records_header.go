// The header line of a records file: delimiter, column names, label set.

package infer

import (
	"bytes"
	"fmt"
	"path/filepath"
	"strings"
)

func (p *parser) header() error {
	d := p.opt.Delimiter
	if d == 0 {
		hasTab := bytes.IndexByte(p.line, '\t') >= 0
		hasComma := bytes.IndexByte(p.line, ',') >= 0
		ext := strings.ToLower(filepath.Ext(p.file))
		switch {
		case hasTab && !hasComma:
			d = '\t'
		case hasComma:
			d = ','
		case ext == ".tsv" || ext == ".tab":
			d = '\t'
		default:
			d = ','
		}
	}
	if d != ',' && d != '\t' {
		return fmt.Errorf("%s: delimiter %q: want ',' or tab", p.file, d)
	}
	p.delim = byte(d)
	p.rep.Delimiter = d
	if err := p.split(); err != nil {
		return err
	}
	p.nCols = len(p.fields)
	seen := make(map[string]int)
	for i := range p.fields {
		name := string(p.field(i))
		p.rep.Columns = append(p.rep.Columns, name)
		key := strings.ToLower(name)
		if j, ok := seen[key]; ok && key != "" {
			return p.errAt(p.col(i), "", "column %s repeats column %d", clip(name), j+1)
		}
		seen[key] = i
		switch key {
		case "time":
			p.colTime = i
		case "label":
			p.colLabel = i
		case "record":
			p.colRecord = i
		case "state":
			p.colState = i
		default:
			p.rep.Ignored = append(p.rep.Ignored, name)
		}
	}
	trace := p.opt.Trace || (p.colState >= 0 && p.colLabel < 0)
	p.rep.Trace = trace
	missing := func(name string) error {
		for _, c := range p.rep.Columns {
			if strings.Contains(c, "\r") {
				return p.errAt(0, "", "missing column %q: the file's lines end with a carriage return only (old Mac format); convert the line endings to LF or CRLF", name)
			}
		}
		return p.errAt(0, "", "missing column %q (header has %s)", name, clipList(p.rep.Columns))
	}
	if p.colTime < 0 {
		return missing("time")
	}
	if trace {
		if p.colState < 0 {
			return missing("state")
		}
		if p.colLabel >= 0 {
			p.rep.Ignored = append(p.rep.Ignored, p.rep.Columns[p.colLabel])
			p.colLabel = -1
		}
	} else {
		if p.colLabel < 0 {
			return missing("label")
		}
		if p.colState >= 0 {
			p.rep.Ignored = append(p.rep.Ignored, p.rep.Columns[p.colState])
			p.colState = -1
		}
	}
	if len(p.opt.Known) > 0 {
		if len(p.opt.Known) > 256 {
			return fmt.Errorf("%s: %d known labels; at most 256", p.file, len(p.opt.Known))
		}
		p.fixed = true
		for _, l := range p.opt.Known {
			if _, dup := p.modelIdx[l]; dup {
				return fmt.Errorf("%s: known label %s given twice", p.file, clip(l))
			}
			if l == EndLabel {
				return fmt.Errorf("%s: %q is reserved for end rows and cannot be a label", p.file, l)
			}
			p.modelIdx[l] = uint8(len(p.data.Labels))
			p.data.Labels = append(p.data.Labels, l)
		}
	}
	return nil
}
