// Command splitledger shows how each input feature's role changed between
// two versions of a gradient-boosted tree model, on serving traffic, and
// gives a launch-gate verdict. See README.md.
package main

import (
	"os"

	"splitledger/cmd/splitledger/cli"
)

func main() {
	os.Exit(cli.Run(os.Args[1:], os.Stdout, os.Stderr))
}
