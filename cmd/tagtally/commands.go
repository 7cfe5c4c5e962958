package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"strings"
)

// command is one subcommand. run gets the arguments after the subcommand's
// name and writes its normal output to stdout.
type command struct {
	name    string
	summary string // one line for `tagtally help`
	run     func(args []string, stdout io.Writer) error
}

// commands is the index of everything the binary does, in the order
// `tagtally help` lists them.
var commands = []command{
	{"serve", "run the base-camp server for phones and the coordinator", runServe},
	{"demo", "add the invented demonstration study to the data file", runDemo},
	{"backup", "copy the data file safely, even while the server runs", runBackup},
	{"sync", "sync records with another tagtally server", runSync},
	{"access", "coordinator link, peer and script tokens, list and revoke access", runAccess},
	{"version", "print the tagtally version", runVersion},
	{"estimate", "estimate population size from capture histories", runEstimate},
	{"export", "write a study as a workbook (XLSX) or CSV files", runExport},
	{"import", "read older data (CSV, XLSX, phone backup) into a study", runImport},
}

// version is set at build time with -ldflags "-X main.version=..."; a plain
// build reports "development".
var version = "development"

func runVersion(args []string, stdout io.Writer) error {
	fs := newFlagSet("version", "tagtally version", "Prints the tagtally version.")
	if err := fs.Parse(args); err != nil {
		return err
	}
	fmt.Fprintln(stdout, "tagtally", version)
	return nil
}

// errUsage marks an error in how the command was called (exit status 2).
var errUsage = errors.New("usage")

func exitCode(err error) int {
	if errors.Is(err, errUsage) || errors.Is(err, flag.ErrHelp) {
		return 2
	}
	return 1
}

func run(args []string) error {
	if len(args) == 0 || args[0] == "help" || args[0] == "-h" || args[0] == "--help" {
		if len(args) > 1 {
			return run([]string{args[1], "--help"})
		}
		printHelp(os.Stdout)
		return nil
	}
	for _, c := range commands {
		if c.name == args[0] {
			err := c.run(args[1:], os.Stdout)
			if errors.Is(err, flag.ErrHelp) {
				return nil
			}
			return err
		}
	}
	printHelp(os.Stderr)
	return fmt.Errorf("%w: unknown command %q", errUsage, args[0])
}

func printHelp(w io.Writer) {
	fmt.Fprintln(w, "tagtally: mark-recapture field records, sync and population estimates.")
	fmt.Fprintln(w, "\nUsage: tagtally COMMAND [options]\n\nCommands:")
	for _, c := range commands {
		fmt.Fprintf(w, "  %-10s %s\n", c.name, c.summary)
	}
	fmt.Fprintln(w, "\nRun `tagtally COMMAND --help` for a command's options.")
}

// newFlagSet makes a flag set whose --help prints the usage line, a plain
// description and every option.
func newFlagSet(name, usage, description string) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.Usage = func() {
		out := fs.Output()
		fmt.Fprintf(out, "Usage: %s\n\n%s\n", usage, strings.TrimSpace(description))
		var any bool
		fs.VisitAll(func(*flag.Flag) { any = true })
		if any {
			fmt.Fprintln(out, "\nOptions:")
			fs.PrintDefaults()
		}
	}
	return fs
}
