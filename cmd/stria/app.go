package main

import (
	"fmt"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"strings"

	"github.com/urfave/cli/v2"
	"golang.org/x/term"

	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/settings"
)

// version is set at build time with -ldflags "-X main.version=...".
var version = "0.1.0-dev"

func newApp() *cli.App {
	runfolder.Version = version
	return &cli.App{
		Name:    "stria",
		Usage:   "fit and compare encoding models of a population's responses to a 1D stimulus",
		Version: version,
		Description: "stria trains a convolutional encoder whose few filters are shared by every neuron, fits per-neuron\n" +
			"tuning curves, scores all of them on held-out trials against the noise ceiling, and exports\n" +
			"filters, tuning curves and per-neuron tables. Start with: stria demo",
		Flags: []cli.Flag{cli.HelpFlag}, // added by hand: the library adds it only with its own help command
		Commands: []*cli.Command{
			demoCommand(),
			inspectCommand(),
			fitCommand(),
			predictCommand(),
			compareCommand(),
			acuityCommand(),
			exportCommand(),
			reportCommand(),
			gatherCommand(),
			helpCommand(),
		},
	}
}

// dataFlags override the config's data paths and output folder.
func dataFlags() []cli.Flag {
	return []cli.Flag{
		&cli.StringFlag{Name: "config", Aliases: []string{"c"}, Usage: "YAML config `FILE`", Required: true},
		&cli.StringFlag{Name: "responses", Usage: "response matrix `FILE` (trials x neurons); overrides data.responses"},
		&cli.StringFlag{Name: "stimulus", Usage: "stimulus values `FILE`; overrides data.stimulus"},
		&cli.StringFlag{Name: "out", Usage: "output `FOLDER`; overrides output"},
	}
}

// loadConfig reads the config and applies the command-line overrides.
// Paths given on the command line are relative to the working folder.
func loadConfig(c *cli.Context) (*settings.Config, error) {
	cfg, err := settings.LoadConfig(c.String("config"))
	if err != nil {
		return nil, err
	}
	abs := func(p string) string {
		if a, err := filepath.Abs(p); err == nil {
			return a
		}
		return p
	}
	if v := c.String("responses"); v != "" {
		cfg.Data.Responses = abs(v)
	}
	if v := c.String("stimulus"); v != "" {
		cfg.Data.Stimulus = abs(v)
	}
	if v := c.String("out"); v != "" {
		cfg.Output = abs(v)
	}
	if err := cfg.Validate(); err != nil {
		return nil, fmt.Errorf("%s: %w", c.String("config"), err)
	}
	if cfg.Train.Threads > 0 {
		// Results do not depend on it: every parallel kernel splits its
		// work independently of the number of cores.
		runtime.GOMAXPROCS(cfg.Train.Threads)
	}
	return cfg, nil
}

// isTerminal reports whether w is a terminal (progress bars only there).
func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	return ok && term.IsTerminal(int(f.Fd()))
}

// oneFolderArg checks that exactly one positional argument was given, and
// explains the usual slip of putting options after it (the command line
// library stops reading options at the first positional argument).
func oneFolderArg(c *cli.Context) error {
	for _, a := range c.Args().Slice() {
		if strings.HasPrefix(a, "-") {
			return fmt.Errorf("%s: option %s after the folder: put options before it (stria %s [options] FOLDER)", c.Command.Name, a, c.Command.Name)
		}
	}
	if c.NArg() != 1 {
		return fmt.Errorf("%s: give one folder (got %d arguments)", c.Command.Name, c.NArg())
	}
	return nil
}

// lockFolder takes the lock of an existing folder that export or report
// reads and writes figures into, so that they neither read a folder a fit
// or comparison is still writing nor run two at once on it. A folder that
// does not exist is left to the command's own error. The caller releases
// the lock.
func lockFolder(c *cli.Context, dir string) (*runfolder.Lock, error) {
	if st, err := os.Stat(dir); err != nil || !st.IsDir() {
		return nil, nil
	}
	lock, note, err := runfolder.AcquireLock(dir, strings.Join(os.Args, " "))
	if err != nil {
		return nil, err
	}
	if note != "" {
		fmt.Fprintln(c.App.ErrWriter, "note:", note)
	}
	return lock, nil
}

// noArgs refuses positional arguments for commands that take none (fit,
// compare, inspect, demo): they would be silently ignored otherwise.
func noArgs(c *cli.Context) error {
	if c.NArg() == 0 {
		return nil
	}
	return fmt.Errorf("%s takes no arguments, only options (got %q; an option after it is not read either): see stria %s --help",
		c.Command.Name, strings.Join(c.Args().Slice(), " "), c.Command.Name)
}
