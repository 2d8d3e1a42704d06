// Command winnow turns raw, compressed web-text shards into clean,
// deduplicated, decontaminated, token-counted training shards, and records
// every document it removed and why.
package main

import (
	"fmt"
	"os"

	"winnow/stages/termtext"
)

func main() {
	if err := rootCmd.Execute(); err != nil {
		fmt.Fprintln(os.Stderr, "winnow:", termtext.EscapeLines(err.Error()))
		os.Exit(exitCode(err))
	}
}
