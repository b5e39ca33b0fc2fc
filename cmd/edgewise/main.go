// Command edgewise fits hidden-state kinetic networks to records of visible
// transitions. Only this package prints or reads flags.
package main

import (
	"bytes"
	"fmt"
	"io"
	"os"
	"slices"

	"edgewise/models"

	"github.com/spf13/pflag"
)

// version is the tool version stamped on every output.
const version = "0.1.0-dev"

func main() {
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}

// run executes one command line and returns the exit code: 0 ok, 1 failure,
// 2 usage error.
func run(args []string, stdout, stderr io.Writer) int {
	if len(args) == 0 {
		usage(stderr)
		return 2
	}
	switch args[0] {
	case "version", "--version":
		fmt.Fprintf(stdout, "edgewise %s\n", version)
		return 0
	case "describe":
		return cmdDescribe(args[1:], stdout, stderr)
	case "simulate":
		return cmdSimulate(args[1:], stdout, stderr)
	case "inspect":
		return cmdInspect(args[1:], stdout, stderr)
	case "fluct":
		return cmdFluct(args[1:], stdout, stderr)
	case "predict":
		return cmdPredict(args[1:], stdout, stderr)
	case "fit":
		return cmdFit(args[1:], stdout, stderr)
	case "compare":
		return cmdCompare(args[1:], stdout, stderr)
	case "plan":
		return cmdPlan(args[1:], stdout, stderr)
	case "help", "-h", "--help":
		if len(args) > 1 && args[0] == "help" {
			if _, ok := commands[args[1]]; ok {
				return run([]string{args[1], "--help"}, stdout, stderr)
			}
			fmt.Fprintf(stderr, "edgewise help: unknown command %q\n", args[1])
			usage(stderr)
			return 2
		}
		usage(stdout)
		return 0
	default:
		fmt.Fprintf(stderr, "edgewise: unknown command %q\n", args[0])
		usage(stderr)
		return 2
	}
}

func usage(w io.Writer) {
	fmt.Fprint(w, `edgewise: kinetic networks seen through a few visible transitions

Usage:
  edgewise COMMAND [options]

Commands:
  describe  properties of a model: stationary law, currents, cycles, sigma
  simulate  exact simulation of a model's visible events, as CSV records
  inspect   model-free statistics and checks of records: rates, P(l'|l), F, tests
  fluct     count-stopped fluctuation test and entropy production bounds from records
  predict   what a model predicts for data through an instrument, and how records compare
  fit       maximum-likelihood fit of one hidden network to records, with intervals
  compare   fit and rank candidate networks; rule out the inconsistent ones
  plan      how many visible events tell scheme B from scheme A (power, KL rate)
  version   print the tool version
  help      show this help; "edgewise help CMD" is "edgewise CMD --help"

Example:
  edgewise describe testdata/ring3.toml
  edgewise describe --help
`)
}

// newFlags makes a subcommand's flag set whose usage text (help, then the
// option list) goes to stdout when help was asked for and to stderr after a
// usage error.
func newFlags(name, help string, args []string, stdout, stderr io.Writer) *pflag.FlagSet {
	fs := pflag.NewFlagSet(name, pflag.ContinueOnError)
	fs.SetOutput(stderr)
	if slices.Contains(args, "-h") || slices.Contains(args, "--help") {
		fs.SetOutput(stdout)
	}
	fs.Usage = func() { fmt.Fprint(fs.Output(), help); fs.PrintDefaults() }
	return fs
}

// parseFlags parses args; it returns -1 to go on, or the exit code (0 after
// help, 2 after a usage error, which it reports on the flag set's output).
func parseFlags(fs *pflag.FlagSet, args []string) int {
	if err := fs.Parse(args); err != nil {
		if err == pflag.ErrHelp {
			return 0
		}
		fmt.Fprintf(fs.Output(), "edgewise %s: %v (see edgewise %s --help)\n", fs.Name(), err, fs.Name())
		return 2
	}
	return -1
}

// commands lists the subcommands, for "edgewise help CMD".
var commands = map[string]bool{"describe": true, "simulate": true, "inspect": true, "fluct": true, "predict": true, "fit": true, "compare": true, "plan": true}

// loadModel reads and parses a model spec and builds its network at the
// start values. src is returned for the checksum stamped on outputs.
func loadModel(path string) ([]byte, *models.Model, *models.Network, error) {
	src, err := os.ReadFile(path)
	if err != nil {
		return nil, nil, nil, err
	}
	if sniff(src[:min(len(src), 4096)]) == "records" {
		return nil, nil, nil, &kindError{path: path, is: recordsKind, want: specKind}
	}
	m, err := models.Parse(bytes.NewReader(src), path)
	if err != nil {
		return nil, nil, nil, err
	}
	net, err := m.Network(m.Start())
	if err != nil {
		return nil, nil, nil, err
	}
	return src, m, net, nil
}
