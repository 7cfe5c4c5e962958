package main

import (
	"errors"
	"fmt"
	"io"

	"tagtally/demo"
)

const demoHelp = `
Adds the invented demonstration study to the data file: a wood-mouse
live-trapping grid of 8 x 8 traps over 8 nights at a made-up place, with
about 150 marked animals, a few retags and deaths in traps, and a handful
of deliberate data problems to find (a misread tag, a sex recorded two
ways, a record without a trap, a slipped decimal in a mass, a record
entered twice). Running it again adds nothing; it never changes records
that are already there.

The server must not be running on the same data file; use
"tagtally serve --demo" to load the demo and serve in one step.`

func runDemo(args []string, stdout io.Writer) error {
	cfg, err := defaultConfig()
	if err != nil {
		return err
	}
	fs := newFlagSet("demo", "tagtally demo [--data PATH]", demoHelp)
	fs.SetOutput(stdout)
	cfg.addDataFlag(fs)
	if err := parseArgs(fs, args, 0); err != nil {
		return err
	}
	if err := cfg.validate(); err != nil {
		return err
	}
	store, err := openStore(cfg.Data)
	if errors.Is(err, errInUse) {
		return fmt.Errorf("%w\nStop the server and run this again, or restart it with `tagtally serve --demo`", err)
	} else if err != nil {
		return err
	}
	n, err := demo.Load(store)
	if cerr := store.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return err
	}
	reportDemo(stdout, n)
	fmt.Fprintf(stdout, "Data file: %s\n", cfg.Data)
	return nil
}

func reportDemo(w io.Writer, added int) {
	if added == 0 {
		fmt.Fprintf(w, "Demo study %q is already loaded; nothing added.\n", demo.StudyID)
		return
	}
	fmt.Fprintf(w, "Demo study %q loaded: %d records added. It is invented: no animals were handled.\n", demo.StudyID, added)
}
