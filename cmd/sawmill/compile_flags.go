package main

import (
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strings"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"
)

// A compile flag that serves some targets only says so in its help text,
// which starts with the targets it serves: "Go: ...", "C: ...; SQL: ...".
// targetFlags refuses a flag given for a target its help does not name, so
// that --float with --target go is an error rather than ignored.
var flagTargets = regexp.MustCompile(`(?:^|; )(Go|C|SQL): `)

// flagServes returns the targets (lower case, as --target spells them) a
// flag's help names; nil for a flag that serves every target.
func flagServes(f *pflag.Flag) []string {
	var out []string
	for _, m := range flagTargets.FindAllStringSubmatch(f.Usage, -1) {
		out = append(out, strings.ToLower(m[1]))
	}
	return out
}

func targetFlags(c *cobra.Command, target string) error {
	var bad []string
	c.Flags().Visit(func(f *pflag.Flag) {
		if on := flagServes(f); on != nil && !slices.Contains(on, target) {
			bad = append(bad, fmt.Sprintf("--%s (%s only)", f.Name, strings.Join(on, ", ")))
		}
	})
	if len(bad) == 0 {
		return nil
	}
	var valid []string
	c.Flags().VisitAll(func(f *pflag.Flag) {
		if slices.Contains(flagServes(f), target) {
			valid = append(valid, "--"+f.Name)
		}
	})
	return usageError{fmt.Errorf("sawmill compile: %s: not for --target %s, whose own flags are %s\nhint: see 'sawmill compile -h'",
		strings.Join(bad, ", "), target, strings.Join(valid, ", "))}
}

// sourceExts are the extensions of files compile writes: an -o that ends
// in one names a file where a folder is wanted.
var sourceExts = []string{".go", ".c", ".h", ".sql"}

// outputFolder refuses an -o that names a file (an existing one, or a new
// one spelt like a source file), since -o is the folder the files go into.
func outputFolder(dir string) error {
	fi, err := os.Stat(dir)
	isFile := err == nil && !fi.IsDir()
	if os.IsNotExist(err) && slices.Contains(sourceExts, strings.ToLower(filepath.Ext(dir))) {
		isFile = true
	}
	if !isFile {
		return nil
	}
	return usageError{fmt.Errorf("sawmill compile: -o %s: -o names the folder to write into, not a file\nhint: %s", dir, folderHint(dir))}
}

// folderHint suggests the flags that put a file named like dir into a
// folder.
func folderHint(dir string) string {
	base := strings.TrimSuffix(filepath.Base(dir), filepath.Ext(dir))
	parent := filepath.Dir(dir)
	return fmt.Sprintf("-o %s --name %s writes %s (SQL), or %s.h and %s.c (C)", parent, base,
		filepath.Join(parent, base+".sql"), filepath.Join(parent, base), filepath.Join(parent, base))
}
