package main

import (
	"fmt"
	"io"

	"edgewise/cmd/edgewise/internal/output"
)

const mergeHelp = `Usage: edgewise merge PART.json... [options]

Join the part files of a comparison run in shards (edgewise compare
--shard i/N -o PART) into the report a single run prints, byte for byte.
Every shard 1..N of the candidates must be given once, all written by the
same edgewise from the same inputs (sha256) and options; bootstrap parts
(compare --shard i/M --bootstrap B --fits 'PARTS') join them when given,
again every shard once. Parts that do not belong together, duplicated or
missing shards and interrupted shards are refused. A PART may be a glob
pattern ('parts/*.json').

With --report DIR the figures need the records and specs again: they are
read from the paths the parts name (relative to the folder merge runs in)
and must have the checksums the parts hold.

Example:
  edgewise compare recs.csv --all-graphs 4 --shard 1/2 -o part-1.json
  edgewise compare recs.csv --all-graphs 4 --shard 2/2 -o part-2.json
  edgewise merge part-1.json part-2.json

Options:
`

func cmdMerge(args []string, stdout, stderr io.Writer) int {
	c := newCommand("merge", mergeHelp, args, stdout, stderr)
	report := c.fs.String("report", "", "write the tables in every format, the figures (PNG and PDF) and a plain-language summary into this folder (new or empty, or --force)")
	c.outputFlags(true)
	if code := c.parse(); code >= 0 {
		return code
	}
	if c.fs.NArg() < 1 {
		return c.usage("want PART.json ..., got no arguments")
	}
	if _, err := c.outputFormat(); err != nil {
		return c.usage("%v", err)
	}
	files := output.NewFiles(stdout, *c.force)
	defer files.Close()
	if err := files.Claim("-o", *c.out); err != nil {
		return c.fail(1, err)
	}
	if *report != "" {
		cleanup, err := claimReportDir(files, *report, *c.force)
		if err != nil {
			return c.fail(1, err)
		}
		defer cleanup()
	}
	parts, err := readParts(c.fs.Args())
	if err != nil {
		return c.fail(1, err)
	}
	setup, v, err := assemble(parts, false)
	if err != nil {
		return c.fail(1, err)
	}
	r := compareReport(setup, v)
	if err := c.emitReport(files, r); err != nil {
		return c.fail(1, err)
	}
	if *report != "" {
		p, err := reprepare(setup, c.stderr)
		if err != nil {
			return c.fail(1, fmt.Errorf("--report: %w", err))
		}
		if err := writeReportDir(files, *report, r, v, p); err != nil {
			return c.fail(1, err)
		}
	}
	return 0
}
