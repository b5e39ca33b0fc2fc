package output

import (
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"os/signal"
	"path/filepath"
	"sync"
	"syscall"
)

// Files writes the output files of one command run safely:
//
//   - Claim every output path first, before any work: a path given to two
//     options (e.g. -o X --plot X, also through a symbolic link) and an
//     existing regular file without force are refused there.
//   - Write each output: a regular file is written to a temporary file in
//     the same folder and renamed over the target, so a reader never sees
//     a partial file; a device or FIFO (/dev/null, /dev/stdout, a pipe) is
//     written in place; a symbolic link is written through, to the file it
//     names, and stays a link. "-" is standard output. Every write, flush,
//     sync and close error is returned.
//   - While a temporary file exists, SIGINT and SIGTERM remove it before the
//     process exits (status 128 + signal number).
//   - Close stops watching signals.
//
// A Files is safe for use by several goroutines.
type Files struct {
	stdout io.Writer
	force  bool

	mu      sync.Mutex
	claimed map[string]string // resolved absolute path (or "-") -> option
	temps   map[string]bool
	sig     chan os.Signal
	done    chan struct{}
	exit    func(code int) // os.Exit; replaced in tests
}

// NewFiles returns a Files writing "-" to stdout; force allows replacing
// existing regular files.
func NewFiles(stdout io.Writer, force bool) *Files {
	return &Files{stdout: stdout, force: force, claimed: map[string]string{}, temps: map[string]bool{}, exit: os.Exit}
}

// resolve follows symbolic links from path to the file they finally name
// (which need not exist), at most 40 deep.
func resolve(path string) (string, error) {
	p := path
	for range 40 {
		fi, err := os.Lstat(p)
		if err != nil || fi.Mode()&fs.ModeSymlink == 0 {
			return p, nil
		}
		l, err := os.Readlink(p)
		if err != nil {
			return "", err
		}
		if !filepath.IsAbs(l) {
			l = filepath.Join(filepath.Dir(p), l)
		}
		p = l
	}
	return "", fmt.Errorf("%s: too many levels of symbolic links", path)
}

// Claim reserves path for the output of option (e.g. "-o", "--plot").
// An empty path claims nothing. It fails when another option claimed the
// same file, when path is an existing regular file and force is not set,
// when it is a folder, or when its folder does not exist.
func (f *Files) Claim(option, path string) error {
	if path == "" {
		return nil
	}
	key := "-"
	if path != "-" {
		target, err := resolve(path)
		if err != nil {
			return err
		}
		abs, err := filepath.Abs(target)
		if err != nil {
			return err
		}
		key = filepath.Clean(abs)
		fi, err := os.Stat(target)
		switch {
		case err == nil && fi.IsDir():
			return fmt.Errorf("%s: is a folder, not a file", path)
		case err == nil && fi.Mode().IsRegular() && !f.force:
			return fmt.Errorf("%s exists; use --force to overwrite", path)
		case err != nil && errors.Is(err, fs.ErrNotExist):
			if d, err := os.Stat(filepath.Dir(target)); err != nil || !d.IsDir() {
				return fmt.Errorf("cannot write %s: folder %s does not exist", path, filepath.Dir(target))
			}
		case err != nil:
			return fmt.Errorf("cannot write %s: %w", path, err)
		}
	}
	f.mu.Lock()
	defer f.mu.Unlock()
	if prev, ok := f.claimed[key]; ok {
		what := "the same file"
		if key == "-" {
			what = "standard output"
		}
		return fmt.Errorf("%s and %s both write to %s (%s): give them different files", prev, option, what, path)
	}
	f.claimed[key] = option
	return nil
}

// stickyWriter keeps the first write error.
type stickyWriter struct {
	w   io.Writer
	err error
}

func (s *stickyWriter) Write(p []byte) (int, error) {
	if s.err != nil {
		return 0, s.err
	}
	n, err := s.w.Write(p)
	if err == nil && n < len(p) {
		err = io.ErrShortWrite
	}
	s.err = err
	return n, err
}

// Write writes gen's output to path ("-": standard output) as the type's
// documentation says, and returns the first error of gen or of any write,
// sync, close or rename.
func (f *Files) Write(path string, gen func(io.Writer) error) error {
	if path == "-" {
		sw := &stickyWriter{w: f.stdout}
		if err := gen(sw); err != nil {
			return fmt.Errorf("writing standard output: %w", err)
		}
		if sw.err != nil {
			return fmt.Errorf("writing standard output: %w", sw.err)
		}
		return nil
	}
	target, err := resolve(path)
	if err != nil {
		return err
	}
	fi, err := os.Stat(target)
	switch {
	case err == nil && fi.IsDir():
		return fmt.Errorf("%s: is a folder, not a file", path)
	case err == nil && !fi.Mode().IsRegular():
		return writeInPlace(path, target, gen)
	case err == nil && !f.force:
		return fmt.Errorf("%s exists; use --force to overwrite", path)
	}
	mode := fs.FileMode(0o644)
	if err == nil {
		mode = fi.Mode().Perm()
	}
	return f.writeAtomic(path, target, mode, gen)
}

// writeInPlace writes to a device or FIFO.
func writeInPlace(path, target string, gen func(io.Writer) error) error {
	out, err := os.OpenFile(target, os.O_WRONLY, 0)
	if err != nil {
		return fmt.Errorf("cannot write %s: %w", path, err)
	}
	sw := &stickyWriter{w: out}
	err = gen(sw)
	if err == nil {
		err = sw.err
	}
	if cerr := out.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	return nil
}

func (f *Files) writeAtomic(path, target string, mode fs.FileMode, gen func(io.Writer) error) error {
	f.watch()
	tmp, err := os.CreateTemp(filepath.Dir(target), "."+filepath.Base(target)+".tmp*")
	if err != nil {
		return fmt.Errorf("cannot write %s: %w", path, errors.Unwrap(err))
	}
	name := tmp.Name()
	f.mu.Lock()
	f.temps[name] = true
	f.mu.Unlock()
	defer func() {
		f.mu.Lock()
		delete(f.temps, name)
		f.mu.Unlock()
	}()
	fail := func(err error) error {
		tmp.Close()
		os.Remove(name)
		return fmt.Errorf("writing %s: %w", path, err)
	}
	sw := &stickyWriter{w: tmp}
	if err := gen(sw); err != nil {
		return fail(err)
	}
	if sw.err != nil {
		return fail(sw.err)
	}
	// CreateTemp makes the file owner-only; an output is for sharing.
	if err := tmp.Chmod(mode); err != nil {
		return fail(err)
	}
	if err := tmp.Sync(); err != nil {
		return fail(err)
	}
	if err := tmp.Close(); err != nil {
		os.Remove(name)
		return fmt.Errorf("writing %s: %w", path, err)
	}
	if err := os.Rename(name, target); err != nil {
		os.Remove(name)
		return fmt.Errorf("writing %s: %w", path, err)
	}
	return nil
}

// watch starts removing temporary files on SIGINT and SIGTERM.
func (f *Files) watch() {
	f.mu.Lock()
	defer f.mu.Unlock()
	if f.sig != nil {
		return
	}
	f.sig = make(chan os.Signal, 1)
	f.done = make(chan struct{})
	signal.Notify(f.sig, os.Interrupt, syscall.SIGTERM)
	go func(sig chan os.Signal, done chan struct{}) {
		select {
		case s := <-sig:
			f.mu.Lock()
			for name := range f.temps {
				os.Remove(name)
			}
			code := 1
			if n, ok := s.(syscall.Signal); ok {
				code = 128 + int(n)
			}
			f.exit(code) // the lock is held so no new temporary file appears
			f.mu.Unlock()
		case <-done:
		}
	}(f.sig, f.done)
}

// Close stops watching signals. Temporary files exist only inside Write,
// so none is left.
func (f *Files) Close() {
	f.mu.Lock()
	defer f.mu.Unlock()
	if f.sig != nil {
		signal.Stop(f.sig)
		close(f.done)
		f.sig = nil
	}
}
