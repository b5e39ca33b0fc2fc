//go:build unix

package output

import (
	"bytes"
	"io"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
)

func hello(w io.Writer) error {
	_, err := io.WriteString(w, "hello\n")
	return err
}

// TestFilesRules: clashing paths (also through a link) are refused at
// Claim; an existing file is kept without force and replaced with it, with
// its mode; /dev/null is written without force; /dev/full fails; a
// symbolic link is written through and stays a link; no temporary file is
// left.
func TestFilesRules(t *testing.T) {
	dir := t.TempDir()
	a := filepath.Join(dir, "a.txt")
	link := filepath.Join(dir, "link.txt")
	if err := os.Symlink("a.txt", link); err != nil {
		t.Fatal(err)
	}
	f := NewFiles(io.Discard, false)
	defer f.Close()
	if err := f.Claim("-o", a); err != nil {
		t.Fatal(err)
	}
	if err := f.Claim("--plot", link); err == nil || !strings.Contains(err.Error(), "-o and --plot both write") {
		t.Errorf("clash through a link: %v", err)
	}
	if err := f.Claim("--hist", "-"); err != nil {
		t.Fatal(err)
	}
	if err := f.Claim("--pn", "-"); err == nil {
		t.Error("two outputs on standard output accepted")
	}
	if err := f.Write(a, hello); err != nil {
		t.Fatal(err)
	}
	if err := os.Chmod(a, 0o600); err != nil {
		t.Fatal(err)
	}
	if err := NewFiles(io.Discard, false).Claim("-o", a); err == nil {
		t.Error("existing file claimed without force")
	}
	if err := f.Write(a, func(w io.Writer) error { _, err := io.WriteString(w, "other\n"); return err }); err == nil {
		t.Error("existing file replaced without force")
	}
	ff := NewFiles(io.Discard, true)
	defer ff.Close()
	if err := ff.Write(link, func(w io.Writer) error { _, err := io.WriteString(w, "through\n"); return err }); err != nil {
		t.Fatal(err)
	}
	if fi, err := os.Lstat(link); err != nil || fi.Mode()&os.ModeSymlink == 0 {
		t.Errorf("link replaced: %v %v", fi.Mode(), err)
	}
	if b, _ := os.ReadFile(a); string(b) != "through\n" {
		t.Errorf("target holds %q", b)
	}
	if fi, _ := os.Stat(a); fi.Mode().Perm() != 0o600 {
		t.Errorf("mode %v, want the old file's 0600", fi.Mode().Perm())
	}
	nf := NewFiles(io.Discard, false)
	defer nf.Close()
	if err := nf.Claim("-o", "/dev/null"); err != nil {
		t.Errorf("/dev/null: %v", err)
	}
	if err := nf.Write("/dev/null", hello); err != nil {
		t.Errorf("/dev/null: %v", err)
	}
	if fi, err := os.Stat("/dev/null"); err != nil || fi.Mode().IsRegular() {
		t.Fatalf("/dev/null replaced: %v", err)
	}
	if _, err := os.Stat("/dev/full"); err == nil {
		if err := nf.Write("/dev/full", hello); err == nil {
			t.Error("/dev/full: no error")
		}
	}
	if err := nf.Claim("-o", filepath.Join(dir, "nowhere", "x.txt")); err == nil {
		t.Error("missing folder accepted")
	}
	if err := nf.Claim("-o", dir); err == nil {
		t.Error("folder accepted")
	}
	left, _ := filepath.Glob(filepath.Join(dir, ".*"))
	if len(left) > 0 {
		t.Errorf("left behind: %v", left)
	}
}

// TestFilesStdoutError: a failing standard output is an error.
func TestFilesStdoutError(t *testing.T) {
	f := NewFiles(&failAt{n: 3}, false)
	if err := f.Write("-", hello); err == nil {
		t.Error("failed standard output not reported")
	}
	var b bytes.Buffer
	if err := NewFiles(&b, false).Write("-", hello); err != nil || b.String() != "hello\n" {
		t.Errorf("%q %v", b.String(), err)
	}
}

// TestFilesSignal: SIGTERM during a write removes the temporary file
// before exiting (the exit is intercepted here).
func TestFilesSignal(t *testing.T) {
	dir := t.TempDir()
	out := filepath.Join(dir, "big.csv")
	f := NewFiles(io.Discard, false)
	defer f.Close()
	exited := make(chan int, 1)
	f.exit = func(code int) { exited <- code }
	err := f.Write(out, func(w io.Writer) error {
		io.WriteString(w, "partial")
		left, _ := filepath.Glob(filepath.Join(dir, ".big.csv.tmp*"))
		if len(left) != 1 {
			t.Errorf("temporary file: %v", left)
		}
		syscall.Kill(os.Getpid(), syscall.SIGTERM)
		if code := <-exited; code != 128+int(syscall.SIGTERM) {
			t.Errorf("exit code %d", code)
		}
		left, _ = filepath.Glob(filepath.Join(dir, ".big.csv.tmp*"))
		if len(left) != 0 {
			t.Errorf("temporary file left after SIGTERM: %v", left)
		}
		return io.ErrUnexpectedEOF
	})
	if err == nil {
		t.Error("no error")
	}
	if _, err := os.Stat(out); err == nil {
		t.Error("output written")
	}
}
