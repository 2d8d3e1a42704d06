// Command winnow turns raw, compressed web-text shards into clean,
// deduplicated, decontaminated, token-counted training shards, and records
// every document it removed and why.
package main

import (
	"fmt"
	"os"
)

func main() {
	if err := rootCmd.Execute(); err != nil {
		fmt.Fprintln(os.Stderr, "winnow:", err)
		os.Exit(exitCode(err))
	}
}
