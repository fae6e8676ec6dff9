package main

import (
	"embed"
	"fmt"
	"io"
	"strings"

	"github.com/urfave/cli/v2"

	"github.com/strialab/stria/eval"
)

// helpFiles are the help topics printed by stria help TOPIC; the methods
// topic is eval/methods.md, embedded by package eval.
//
//go:embed help/*.md
var helpFiles embed.FS

// helpTopicNames are the topics of stria help, in the order they are
// listed.
var helpTopicNames = []string{"config", "outputs", "metrics", "formats", "large", "methods"}

// helpTopic returns the text of a help topic and whether it exists.
func helpTopic(name string) (string, bool) {
	if name == "methods" {
		return eval.Methods, true
	}
	for _, t := range helpTopicNames {
		if t == name {
			b, err := helpFiles.ReadFile("help/" + name + ".md")
			return string(b), err == nil
		}
	}
	return "", false
}

// helpCommand replaces the command line library's own help command: with
// no argument it lists the commands, with a command name it shows that
// command's options, and with a topic name it prints the topic.
func helpCommand() *cli.Command {
	topics := strings.Join(helpTopicNames, ", ")
	return &cli.Command{
		Name:            "help",
		Aliases:         []string{"h"},
		Usage:           "list the commands, or show the help of a command or of a topic: " + topics,
		ArgsUsage:       "[COMMAND | TOPIC]",
		HideHelpCommand: true,
		Description: "stria help             lists the commands\n" +
			"stria help COMMAND     shows a command's options (as stria COMMAND --help)\n" +
			"stria help TOPIC       prints a topic: " + topics,
		Action: func(c *cli.Context) error {
			if c.NArg() > 1 {
				return fmt.Errorf("help: give one command or topic (got %d arguments)", c.NArg())
			}
			name := c.Args().First()
			if name == "" {
				return cli.ShowAppHelp(c)
			}
			if text, ok := helpTopic(name); ok {
				_, err := io.WriteString(c.App.Writer, text)
				return err
			}
			if cmd := c.App.Command(name); cmd != nil {
				// The parent context lists the app's commands.
				parent := c
				if l := c.Lineage(); len(l) > 1 {
					parent = l[1]
				}
				return cli.ShowCommandHelp(parent, cmd.Name)
			}
			var cmds []string
			for _, cmd := range c.App.Commands {
				cmds = append(cmds, cmd.Name)
			}
			return fmt.Errorf("help: no command or topic %q (commands: %s; topics: %s)", name, strings.Join(cmds, ", "), topics)
		},
	}
}
