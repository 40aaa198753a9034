// Command scenario writes a synthetic scenario of register/simulate into a
// folder, for the report's CI check, until `ferry simulate` exists:
//
//	go run ./register/report/internal/scenario [-seed N] [-small] DIR
package main

import (
	"flag"
	"fmt"
	"os"

	"ferry/register/simulate"
)

func main() {
	seed := flag.Uint64("seed", 1, "seed of the scenario")
	small := flag.Bool("small", false, "the small scenario (a 200 µm field) rather than the default one")
	flag.Parse()
	if flag.NArg() != 1 {
		fmt.Fprintln(os.Stderr, "usage: scenario [-seed N] [-small] DIR")
		os.Exit(1)
	}
	params := simulate.DefaultParams()
	if *small {
		params = simulate.SmallParams()
	}
	s, err := simulate.Generate(params, *seed)
	if err != nil {
		fmt.Fprintln(os.Stderr, "scenario:", err)
		os.Exit(1)
	}
	files, err := s.Write(flag.Arg(0))
	if err != nil {
		fmt.Fprintln(os.Stderr, "scenario:", err)
		os.Exit(1)
	}
	fmt.Println(files.Landmarks)
	fmt.Println(files.Cells)
	fmt.Println(files.Candidates)
}
