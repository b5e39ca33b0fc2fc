package models

import (
	"strings"
	"testing"
)

// TestSpecLimits: specs nested too deep, too large, in UTF-16 or with
// overlong names are refused at once with the limit and a line, and
// messages repeat at most 40 bytes of a name; brackets and dots inside
// strings and comments do not count as nesting.
func TestSpecLimits(t *testing.T) {
	const ring = `name = "r"
states = ["A", "B", "C"]
[[edge]]
between = ["A", "B"]
rates = ["kab", "kba"]
labels = ["+", "-"]
[[edge]]
between = ["B", "C"]
rates = ["kbc", "kcb"]
[[edge]]
between = ["C", "A"]
rates = ["kca", "kac"]
`
	long := strings.Repeat("s", 50000)
	cases := []struct{ name, text, want string }{
		{"deep arrays", "x = " + strings.Repeat("[", 20000) + strings.Repeat("]", 20000) + "\n", "x.toml:1: nested deeper than 32"},
		{"deep inline tables", "x = " + strings.Repeat("{a = ", 20000) + "1" + strings.Repeat("}", 20000) + "\n", "x.toml:1: nested deeper than 32"},
		{"deep dotted header", "name = \"a\"\n\n[" + strings.Repeat("a.", 4999) + "a]\nb = 1\n", "x.toml:3: nested deeper than 32"},
		{"deep dotted key", "name = \"a\"\n" + strings.Repeat("a.", 100) + "a = 1\n", "x.toml:2: nested deeper than 32"},
		{"too large", "# " + strings.Repeat("x", MaxSpecBytes) + "\n", "larger than 1048576 bytes"},
		{"UTF-16", "\xff\xfen\x00a\x00m\x00e\x00", "x.toml:1: UTF-16 text"},
		{"long state name", strings.Replace(ring, `"C"]`, `"`+long+`"]`, 1), `states: "ssssssssssssssssssssssssssssssssssssssss"... (50000 bytes) is longer than 100 bytes`},
		{"too many states", "states = [" + strings.Repeat(`"s",`, 1001) + "]\n", "x.toml:1: states: 1001 states; at most 1000"},
		{"long key", ring + "[param." + long + "]\nvalue = 1\n", `key "ssssssssssssssssssssssssssssssssssssssss"... (50000 bytes) is longer than 100 bytes`},
	}
	for _, c := range cases {
		_, err := Parse(strings.NewReader(c.text), "x.toml")
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: %.300v, want %q", c.name, err, c.want)
			continue
		}
		if len(err.Error()) > 300 {
			t.Errorf("%s: message of %d bytes", c.name, len(err.Error()))
		}
	}
	// Not nesting: brackets and dots in strings and comments, a moderately
	// nested value, multi-line strings.
	ok := ring + `description = """[[[[{{{{ a.b.c.d.e.f.g.h.i.j.k.l.m.n.o.p.q.r.s.t.u.v.w.x.y.z.a.b.c.d.e.f.g.h
'''still "inside" [[[["""
# [[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[ a.b.c.d.e.f.g.h.i.j.k.l.m.n.o.p.q.r.s.t.u.v.w.x.y.z.a.b.c.d.e.f.g
[param.kab]
value = 2.5 # a.b.c.d.e.f.g.h.i.j.k.l.m.n.o.p.q.r.s.t.u.v.w.x.y.z.a.b.c.d.e.f.g.h.i.j
[label."+.+.+.+.+.+.+.+.+.+.+.+.+.+.+.+.+.+.+.+.+.+.+.+.+.+.+.+.+.+.+.+.+.+.+"]
detect = 1
`
	_, err := Parse(strings.NewReader(ok), "ok.toml")
	if err != nil && strings.Contains(err.Error(), "nested deeper") {
		t.Errorf("strings and comments counted as nesting: %v", err)
	}
}
