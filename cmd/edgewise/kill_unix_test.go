//go:build unix

package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"syscall"
	"testing"
	"time"
)

// TestMain lets the test binary stand in for the edgewise command (for
// the kill test) when EDGEWISE_AS_CLI is set.
func TestMain(m *testing.M) {
	if os.Getenv("EDGEWISE_AS_CLI") == "1" {
		os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
	}
	os.Exit(m.Run())
}

// TestSimulateKill: SIGTERM or SIGINT during 'simulate -o big.csv'
// removes the hidden temporary file, leaves no output and exits with 128
// plus the signal number (issue 8: a kill left up to 114 MB behind).
func TestSimulateKill(t *testing.T) {
	for _, sig := range []syscall.Signal{syscall.SIGTERM, syscall.SIGINT} {
		dir := t.TempDir()
		out := filepath.Join(dir, "big.csv")
		cmd := exec.Command(os.Args[0], "simulate", "../../testdata/ring3.toml", "-n", "200000000", "-o", out)
		cmd.Env = append(os.Environ(), "EDGEWISE_AS_CLI=1")
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		var tmp []string
		for i := 0; i < 400 && len(tmp) == 0; i++ {
			time.Sleep(25 * time.Millisecond)
			tmp, _ = filepath.Glob(filepath.Join(dir, ".big.csv.tmp*"))
		}
		if len(tmp) == 0 {
			cmd.Process.Kill()
			cmd.Wait()
			t.Fatal("no temporary file appeared")
		}
		time.Sleep(100 * time.Millisecond) // let it write a while
		if err := cmd.Process.Signal(sig); err != nil {
			t.Fatal(err)
		}
		err := cmd.Wait()
		if ee, ok := err.(*exec.ExitError); !ok || ee.ExitCode() != 128+int(sig) {
			t.Errorf("%v: exit %v, want status %d", sig, err, 128+int(sig))
		}
		left, _ := filepath.Glob(filepath.Join(dir, "*"))
		hidden, _ := filepath.Glob(filepath.Join(dir, ".*"))
		if len(left)+len(hidden) > 0 {
			t.Errorf("%v: left behind %v %v", sig, left, hidden)
		}
	}
}
