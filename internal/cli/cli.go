// Package cli holds what the example commands share: flags parsed before
// and after the positional arguments.
package cli

import "flag"

// Parse parses args with fs, allowing flags after positional arguments
// (the standard flag package stops at the first one): it parses, takes one
// positional argument, and parses what follows it again. After "--" every
// remaining argument is positional. It returns the positional arguments,
// or the first parse error (flag.ErrHelp for -h).
func Parse(fs *flag.FlagSet, args []string) ([]string, error) {
	var pos []string
	for {
		if err := fs.Parse(args); err != nil {
			return pos, err
		}
		rest := fs.Args()
		if len(rest) == 0 {
			return pos, nil
		}
		if used := len(args) - len(rest); used > 0 && args[used-1] == "--" {
			return append(pos, rest...), nil
		}
		pos = append(pos, rest[0])
		args = rest[1:]
	}
}
