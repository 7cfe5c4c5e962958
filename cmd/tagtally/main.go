// Command tagtally is the single binary of the tagtally mark-recapture
// toolkit: it serves the phone app and API, runs estimators, and moves
// data in and out. `tagtally help` lists the subcommands.
package main

import (
	"fmt"
	"os"
)

func main() {
	if err := run(os.Args[1:]); err != nil {
		fmt.Fprintln(os.Stderr, "tagtally:", err)
		os.Exit(exitCode(err))
	}
}
