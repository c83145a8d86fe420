// Command strata runs density-of-states studies of the Ising model at
// imaginary magnetic field; see README.md.
package main

import (
	"os"

	"strata/pipeline"
)

func main() {
	os.Exit(pipeline.Main(os.Args[1:], os.Stdout, os.Stderr))
}
