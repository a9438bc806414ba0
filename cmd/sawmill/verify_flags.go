package main

import (
	"fmt"
	"slices"
	"strings"

	"github.com/sawmill-dev/sawmill/emit/targets"
	"github.com/sawmill-dev/sawmill/verify"
)

// checkVerifyFlags refuses --layout and --variant values that none of the
// chosen targets has, and --variant or --dialect given for targets that
// have none, naming the valid values: a typo must not quietly check
// everything, or nothing.
func checkVerifyFlags(fl *verifyFlags, runners []verify.Runner) error {
	chosen := chosenRunners(fl.targets, runners)
	var layouts, variants []string
	sql := false
	for _, r := range chosen {
		for _, l := range r.Layouts() {
			if !slices.Contains(layouts, l) {
				layouts = append(layouts, l)
			}
		}
		if isSQLRunner(r.Name()) {
			sql = true
			continue // SQL variants are dialects, chosen with --dialect
		}
		for _, v := range r.Variants() {
			if v != "" && !slices.Contains(variants, v) {
				variants = append(variants, v)
			}
		}
	}
	usage := func(format string, a ...any) error {
		return usageError{fmt.Errorf("sawmill verify: "+format+"\nhint: see 'sawmill verify -h'", a...)}
	}
	for _, l := range fl.layouts {
		if !hasFoldName(layouts, l) {
			return usage("--layout %q is unknown for %s: use %s", l, targetWords(fl.targets), strings.Join(layouts, ", "))
		}
	}
	for _, v := range fl.variants {
		if len(variants) == 0 {
			return usage("--variant %q: %s has no variants (C has double and float)", v, targetWords(fl.targets))
		}
		if !hasFoldName(variants, v) {
			return usage("--variant %q is unknown for %s: use %s", v, targetWords(fl.targets), strings.Join(variants, ", "))
		}
	}
	if len(fl.dialects) > 0 && !sql {
		return usage("--dialect is for SQL targets, and %s has none (add sql to it)", targetWords(fl.targets))
	}
	return nil
}

// chosenRunners are the runners --target names (all without it); unknown
// names are left to verify.Verify, which names the valid ones.
func chosenRunners(names []string, runners []verify.Runner) []verify.Runner {
	if len(names) == 0 {
		return runners
	}
	var out []verify.Runner
	for _, r := range runners {
		for _, t := range names {
			t = strings.ToLower(strings.TrimSpace(t))
			if tg, _ := targets.Runs(r.Name()); t == r.Name() || t == tg.Name {
				out = append(out, r)
				break
			}
		}
	}
	return out
}

// isSQLRunner reports whether the runner runs a target of several engines
// (SQL's), whose variants are dialects.
func isSQLRunner(name string) bool {
	tg, _ := targets.Runs(name)
	return tg.Engines != nil
}

func hasFoldName(list []string, s string) bool {
	return slices.ContainsFunc(list, func(x string) bool { return strings.EqualFold(x, strings.TrimSpace(s)) })
}

func targetWords(targets []string) string {
	if len(targets) == 0 {
		return "the targets"
	}
	return "--target " + strings.Join(targets, ",")
}
