// Limits a model spec must keep before it is parsed: size, encoding,
// nesting, and the length of names.

package models

import (
	"bytes"
	"fmt"
	"sort"
	"strconv"
)

// Limits of a model spec. A spec beyond them is refused, with the limit
// said, before the TOML decoder sees it (a spec nested 20,000 deep took the
// decoder over 20 s and 2.75 GB): real specs are a few kilobytes, nest 3
// deep and use short names.
const (
	MaxSpecBytes = 1 << 20 // file size
	MaxSpecDepth = 32      // arrays, inline tables and dotted key parts, nested
	MaxNameBytes = 100     // a key, a state, label or parameter name, any string value
	MaxDescBytes = 4000    // the description
	// MaxStates bounds the network: the stationary law and the
	// likelihood's matrices cost O(N^3) (1000 states: describe 0.6 s,
	// predict 8 s on the shared machine).
	MaxStates = 1000
)

// checkSpecText refuses, with file and line, a spec whose text is UTF-16
// (or binary), larger than MaxSpecBytes or nested deeper than MaxSpecDepth.
// The nesting scan counts open arrays and inline tables and the parts of
// dotted keys and table headers, skipping strings and comments; it does
// not check the TOML syntax (the decoder does).
func checkSpecText(src []byte, file string) error {
	if len(src) > MaxSpecBytes {
		return &SpecError{File: file, Msg: fmt.Sprintf("larger than %d bytes: not a model spec", MaxSpecBytes)}
	}
	if bytes.HasPrefix(src, []byte("\xff\xfe")) || bytes.HasPrefix(src, []byte("\xfe\xff")) || bytes.IndexByte(src, 0) >= 0 {
		return &SpecError{File: file, Line: 1, Msg: "UTF-16 text (or binary data): save the file as UTF-8"}
	}
	line := 1
	var stack []byte // open '[' and '{' of values
	key := true      // reading a key or a table header
	dots := 0
	deep := func() error {
		return &SpecError{File: file, Line: line, Msg: fmt.Sprintf("nested deeper than %d levels (arrays, inline tables and dotted keys): not a model spec", MaxSpecDepth)}
	}
	for i := 0; i < len(src); i++ {
		c := src[i]
		switch c {
		case '\n':
			line++
			if len(stack) == 0 {
				key, dots = true, 0
			}
			continue
		case '#':
			for i+1 < len(src) && src[i+1] != '\n' {
				i++
			}
			continue
		case '"', '\'':
			n := 1
			if i+2 < len(src) && src[i+1] == c && src[i+2] == c {
				n = 3
			}
			i += n
			for ; i < len(src); i++ {
				if src[i] == '\n' {
					line++
				}
				if c == '"' && src[i] == '\\' {
					i++
					if i < len(src) && src[i] == '\n' {
						line++
					}
					continue
				}
				if src[i] == c && (n == 1 || (i+2 < len(src) && src[i+1] == c && src[i+2] == c)) {
					i += n - 1
					break
				}
			}
			continue
		}
		switch {
		case c == '.' && key:
			if dots++; len(stack)+dots+1 > MaxSpecDepth {
				return deep()
			}
		case c == '=' && key:
			key, dots = false, 0
		case (c == '[' || c == '{') && !(key && len(stack) == 0):
			if stack = append(stack, c); len(stack) > MaxSpecDepth {
				return deep()
			}
			if c == '{' {
				key, dots = true, 0
			}
		case (c == ']' || c == '}') && len(stack) > 0:
			stack = stack[:len(stack)-1]
			key = false
		case c == ',' && len(stack) > 0 && stack[len(stack)-1] == '{':
			key, dots = true, 0
		}
	}
	return nil
}

// checkSpecNames refuses keys and string values longer than MaxNameBytes
// (the description: MaxDescBytes), naming the key and its line and
// repeating at most 40 bytes of the text. Names go into every table and
// message; a 50,000-byte name made each message 50,000 bytes long.
func checkSpecNames(doc map[string]any, file string, loc locator) error {
	if st, ok := doc["states"].([]any); ok && len(st) > MaxStates {
		return &SpecError{File: file, Line: loc.line("states"), Key: "states", Msg: fmt.Sprintf("%d states; at most %d", len(st), MaxStates)}
	}
	var walk func(v any, path string) error
	walk = func(v any, path string) error {
		switch x := v.(type) {
		case map[string]any:
			keys := make([]string, 0, len(x))
			for k := range x {
				keys = append(keys, k)
			}
			sort.Strings(keys)
			for _, k := range keys {
				p := k
				if path != "" {
					p = path + "." + k
				}
				if len(k) > MaxNameBytes {
					return &SpecError{File: file, Line: loc.line(path), Key: Clip(path), Msg: fmt.Sprintf("key %s is longer than %d bytes", Clip(k), MaxNameBytes)}
				}
				if err := walk(x[k], p); err != nil {
					return err
				}
			}
		case []map[string]any:
			for i, e := range x {
				if err := walk(e, fmt.Sprintf("%s[%d]", path, i)); err != nil {
					return err
				}
			}
		case []any:
			for _, e := range x {
				if err := walk(e, path); err != nil {
					return err
				}
			}
		case string:
			limit := MaxNameBytes
			if path == "description" {
				limit = MaxDescBytes
			}
			if len(x) > limit {
				return &SpecError{File: file, Line: loc.line(path), Key: path, Msg: fmt.Sprintf("%s is longer than %d bytes", Clip(x), limit)}
			}
		}
		return nil
	}
	return walk(doc, "")
}

// Clip quotes s for an error message, cut to its first 40 bytes (at a
// character boundary) with the full length said, so that a message never
// repeats a long input whole.
func Clip(s string) string {
	if len(s) <= 40 {
		return strconv.Quote(s)
	}
	cut := 40
	for cut > 0 && s[cut]&0xc0 == 0x80 {
		cut--
	}
	return fmt.Sprintf("%s... (%d bytes)", strconv.Quote(s[:cut]), len(s))
}
