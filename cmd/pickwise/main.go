// Command pickwise computes the selection rule with the smallest worst-case
// regret for picking the best of n channels from one noisy reading of each,
// certifies it in exact arithmetic, and ships it as decision tables.
//
// Usage:
//
//	pickwise solve MODEL.toml [--json] [-o result.json] [--solver clp|gonum]
//	pickwise verify RESULT.json
//	pickwise table SOURCE --format text|csv|json|md|html|c [-o PATH]
//	pickwise plot SOURCE -o FILE.png|FILE.svg
//	pickwise lp MODEL.toml -o model.mps
//	pickwise demo [-dir DIR]
//	pickwise help [COMMAND]
//
// Run "pickwise help COMMAND" for the flags of a command.
package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"strings"
)

// exit statuses
const (
	exitOK       = 0
	exitMismatch = 1 // a verification failed, or a solve failed
	exitUsage    = 2 // bad input: flags, model file, result file
)

// command is one subcommand.
type command struct {
	name    string
	args    string // argument synopsis
	summary string
	run     func(app *app, args []string) int
}

// app carries the output streams, so that commands can be tested.
type app struct {
	stdout, stderr io.Writer
	commands       []command
}

func main() {
	os.Exit(newApp(os.Stdout, os.Stderr).run(os.Args[1:]))
}

func newApp(stdout, stderr io.Writer) *app {
	a := &app{stdout: stdout, stderr: stderr}
	a.commands = []command{
		{"solve", "MODEL.toml", "compute the optimal rule, its certificate, and the greedy and offset figures", runSolve},
		{"verify", "RESULT.json", "re-check a result file in exact arithmetic, without an LP solver", runVerify},
		{"table", "SOURCE", "write the decision tables as text, csv, json, md, html or C", runTable},
		{"plot", "SOURCE", "draw the rule: choice probabilities and regret curves, or decision regions", runPlot},
		{"lp", "MODEL.toml", "write the exact LP in free MPS, for any LP solver", runLP},
		{"demo", "", "solve the built-in receive-chain demo model and write every output", runDemo},
		{"help", "[COMMAND]", "show help for pickwise or for one command", runHelp},
	}
	return a
}

func (a *app) run(args []string) int {
	if len(args) == 0 {
		a.usage(a.stderr)
		return exitUsage
	}
	name := args[0]
	if name == "-h" || name == "--help" || name == "-help" {
		a.usage(a.stdout)
		return exitOK
	}
	for _, c := range a.commands {
		if c.name == name {
			return c.run(a, args[1:])
		}
	}
	fmt.Fprintf(a.stderr, "pickwise: unknown command %q\n\n", name)
	a.usage(a.stderr)
	return exitUsage
}

func (a *app) usage(w io.Writer) {
	fmt.Fprint(w, `pickwise picks the best of n channels from one noisy reading of each.
It computes the randomized rule with the smallest worst-case regret for the
noise model you give, certifies it exactly, and ships it as decision tables.

Usage: pickwise COMMAND [ARGUMENTS]

Commands:
`)
	for _, c := range a.commands {
		fmt.Fprintf(w, "  %-7s %s\n", c.name, c.summary)
	}
	fmt.Fprint(w, `
Run "pickwise help COMMAND" or "pickwise COMMAND --help" for its flags.
The guarantee holds for the stated noise model only; defer to the codes and
practices of your field.
`)
}

func runHelp(a *app, args []string) int {
	if len(args) == 0 {
		a.usage(a.stdout)
		return exitOK
	}
	for _, c := range a.commands {
		if c.name == args[0] && c.name != "help" {
			return c.run(a, []string{"--help"})
		}
	}
	if args[0] == "help" {
		a.usage(a.stdout)
		return exitOK
	}
	fmt.Fprintf(a.stderr, "pickwise help: unknown command %q\n", args[0])
	return exitUsage
}

// flagSet returns a flag set for a command whose usage names its synopsis
// and description.
func (a *app) flagSet(name, synopsis, description string) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(a.stderr)
	fs.Usage = func() {
		w := fs.Output()
		fmt.Fprintf(w, "Usage: pickwise %s %s\n\n%s\n", name, synopsis, strings.TrimSpace(description))
		has := false
		fs.VisitAll(func(*flag.Flag) { has = true })
		if has {
			fmt.Fprint(w, "\nFlags:\n")
			fs.PrintDefaults()
		}
	}
	return fs
}

// parse parses flags that may come before or after the positional
// arguments, and returns the positional ones. It returns done with an exit
// status when the command should stop (help asked, or a flag error).
func (a *app) parse(fs *flag.FlagSet, args []string) (pos []string, status int, done bool) {
	usage := fs.Usage
	defer func() { fs.Usage = usage }()
	for {
		// The flag package prints the usage itself on -h and on errors;
		// it is printed here instead, once: on standard output when help
		// was asked, after the error on standard error otherwise.
		fs.Usage = func() {}
		err := fs.Parse(args)
		fs.Usage = usage
		if errors.Is(err, flag.ErrHelp) {
			fs.SetOutput(a.stdout)
			fs.Usage()
			return nil, exitOK, true
		}
		if err != nil {
			fs.Usage()
			return nil, exitUsage, true
		}
		args = fs.Args()
		if len(args) == 0 {
			return pos, 0, false
		}
		pos = append(pos, args[0])
		args = args[1:]
	}
}

// fail prints an error and returns the exit status.
func (a *app) fail(status int, format string, args ...any) int {
	fmt.Fprintf(a.stderr, "pickwise: "+format+"\n", args...)
	return status
}
