// Command failframe measures how a model tower failed from a slow-motion clip
// of its load test and the load-cell log.
package main

import (
	"os"

	"github.com/failframe/failframe/cmd/cli"
)

func main() {
	os.Exit(cli.Main(cli.System()))
}
