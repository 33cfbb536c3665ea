// Command gen writes the demo and test captures of this directory, their truth files and
// README.md. Run it from the module root:
//
//	go run ./testdata/gen
//
// The output depends only on the code (fixed scenarios and seeds), so running it again
// gives the same bytes.
package main

import (
	"flag"
	"fmt"
	"os"

	"github.com/caploop/caploop/analysis/loop/virtual"
)

func main() {
	dir := flag.String("dir", "testdata", "directory to write into")
	flag.Parse()
	if err := virtual.GenerateTestdata(*dir); err != nil {
		fmt.Fprintln(os.Stderr, "gen:", err)
		os.Exit(1)
	}
}
