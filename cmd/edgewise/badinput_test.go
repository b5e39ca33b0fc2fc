package main

import (
	"bytes"
	"context"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"text/template"
	"time"
	"unicode/utf16"
)

// TestBadInputCatalogue runs every case of testdata/badinput through the
// built command and checks its exit code and a fragment of its message.
// A case is one file NAME.case:
//
//	# what the case is about (comment lines start with '#')
//	args: inspect {input} --windows 5     (the command line; {input} is the input file,
//	                                      {dir} a temporary folder, {repo} the repository)
//	input: records.csv                    (optional: the input's file name, for its extension)
//	exit: 1                               (the expected exit code)
//	message: no record has                (a fragment of stderr, or of stdout with exit 0)
//	template: true                        (optional: expand the input as a Go template)
//	---
//	the input, verbatim, up to the end of the file
//
// Templates have repeat N "text" and utf16 "text" (UTF-16LE with a byte
// order mark), for inputs too large or too binary to keep as text. Every
// case must also finish within 60 s, print no panic, and keep its message
// under 2,000 bytes (echoed input is clipped).
func TestBadInputCatalogue(t *testing.T) {
	files, err := filepath.Glob("../../testdata/badinput/*.case")
	if err != nil || len(files) == 0 {
		t.Fatalf("no cases: %v", err)
	}
	repo, err := filepath.Abs("../..")
	if err != nil {
		t.Fatal(err)
	}
	bin := filepath.Join(t.TempDir(), "edgewise")
	if out, err := exec.Command("go", "build", "-o", bin, ".").CombinedOutput(); err != nil {
		t.Fatalf("build: %v\n%s", err, out)
	}
	for _, file := range files {
		name := strings.TrimSuffix(filepath.Base(file), ".case")
		t.Run(name, func(t *testing.T) {
			c, err := readCase(file)
			if err != nil {
				t.Fatal(err)
			}
			dir := t.TempDir()
			var args []string
			for _, a := range strings.Fields(c.args) {
				if strings.Contains(a, "{input}") {
					in := filepath.Join(dir, c.inputName)
					if err := os.WriteFile(in, c.input, 0o644); err != nil {
						t.Fatal(err)
					}
					a = strings.ReplaceAll(a, "{input}", in)
				}
				a = strings.ReplaceAll(a, "{dir}", dir)
				args = append(args, strings.ReplaceAll(a, "{repo}", repo))
			}
			ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
			defer cancel()
			cmd := exec.CommandContext(ctx, bin, args...)
			cmd.Dir = dir
			var stdout, stderr bytes.Buffer
			cmd.Stdout, cmd.Stderr = &stdout, &stderr
			err = cmd.Run()
			if ctx.Err() != nil {
				t.Fatalf("%v: did not finish in 60 s", args)
			}
			code := 0
			if ee, ok := err.(*exec.ExitError); ok {
				code = ee.ExitCode()
			} else if err != nil {
				t.Fatal(err)
			}
			msg := stderr.String()
			if c.exit == 0 {
				msg += stdout.String()
			}
			if code != c.exit || !strings.Contains(msg, c.message) {
				t.Fatalf("%v: exit %d, want %d; message should contain %q:\n%.2000s", args, code, c.exit, c.message, msg)
			}
			if strings.Contains(stderr.String(), "panic") || strings.Contains(stderr.String(), "goroutine ") {
				t.Fatalf("panic:\n%.2000s", stderr.String())
			}
			if stderr.Len() > 2000 || bytes.IndexByte(stderr.Bytes(), 0) >= 0 {
				t.Fatalf("stderr of %d bytes (or with NUL bytes): %.300q", stderr.Len(), stderr.String())
			}
		})
	}
}

type badCase struct {
	args, inputName, message string
	exit                     int
	input                    []byte
}

// readCase parses a .case file (see TestBadInputCatalogue).
func readCase(path string) (*badCase, error) {
	src, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	head, input, ok := bytes.Cut(src, []byte("\n---\n"))
	if !ok {
		head, input = src, nil
	}
	c := &badCase{inputName: "input.csv", exit: -1, input: input}
	tmpl := false
	for _, line := range strings.Split(string(head), "\n") {
		line = strings.TrimSpace(line)
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		k, v, ok := strings.Cut(line, ":")
		if !ok {
			return nil, fmt.Errorf("%s: line %q: want key: value", path, line)
		}
		v = strings.TrimSpace(v)
		switch k {
		case "args":
			c.args = v
		case "input":
			c.inputName = v
		case "exit":
			if c.exit, err = strconv.Atoi(v); err != nil {
				return nil, fmt.Errorf("%s: exit %q", path, v)
			}
		case "message":
			c.message = v
		case "template":
			tmpl = v == "true"
		default:
			return nil, fmt.Errorf("%s: unknown key %q", path, k)
		}
	}
	if c.args == "" || c.exit < 0 || c.message == "" {
		return nil, fmt.Errorf("%s: args, exit and message are required", path)
	}
	if tmpl {
		t, err := template.New(path).Funcs(template.FuncMap{
			"repeat": func(n int, s string) string { return strings.Repeat(s, n) },
			"utf16": func(s string) string {
				var b []byte
				for _, u := range append([]uint16{0xfeff}, utf16.Encode([]rune(s))...) {
					b = append(b, byte(u), byte(u>>8))
				}
				return string(b)
			},
		}).Parse(string(input))
		if err != nil {
			return nil, err
		}
		var buf bytes.Buffer
		if err := t.Execute(&buf, nil); err != nil {
			return nil, err
		}
		c.input = buf.Bytes()
	}
	return c, nil
}
