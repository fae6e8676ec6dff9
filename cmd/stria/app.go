package main

import (
	"github.com/urfave/cli/v2"
	_ "gonum.org/v1/gonum/mat"
	_ "gopkg.in/yaml.v3"
)

// version is set at build time with -ldflags "-X main.version=...".
var version = "0.1.0-dev"

func newApp() *cli.App {
	return &cli.App{
		Name:    "stria",
		Usage:   "fit and compare encoding models of a population's responses to a 1D stimulus",
		Version: version,
	}
}
