package main

import (
	"fmt"
	"io"
	"sort"
	"strings"

	flag "github.com/spf13/pflag"

	"github.com/tessera-fmri/tessera/fit"
)

var checkCommand = &command{
	name:    "check",
	args:    "STUDY [model flags]",
	summary: "read and validate every input, build every design and print the design audit; fits nothing",
	example: `tessera check study.csv
tessera check study.csv --confounds csf,pulse_ox --highpass 100`,
	flags: func() *flag.FlagSet { fs, _ := checkFlags(); return fs },
}

func init() { checkCommand.run = runCheck }

func checkFlags() (*flag.FlagSet, *modelFlags) {
	fs := flag.NewFlagSet("check", flag.ContinueOnError)
	m := &modelFlags{}
	m.register(fs)
	return fs, m
}

func runCheck(args []string, stdout, stderr io.Writer) error {
	fs, m := checkFlags()
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	o, err := m.options()
	if err != nil {
		return err
	}
	l, err := m.load(fs.Args(), o)
	if err != nil {
		return err
	}
	plans := l.plans
	fmt.Fprintf(stdout, "%s: %d run(s), conditions: %s\n\n", l.source, len(plans), strings.Join(fit.Conditions(plans), ", "))
	fmt.Fprintf(stdout, "%-16s %6s %8s %6s %7s %10s  %s\n", "run", "TR", "volumes", "terms", "regions", "cond.num.", "events per condition")
	var warnings []string
	for _, p := range plans {
		n, k := p.Design.X.Dims()
		var ev []string
		conds := append([]string(nil), p.Design.Conditions...)
		sort.Strings(conds)
		for _, c := range conds {
			ev = append(ev, fmt.Sprintf("%s %d", c, p.Events[c]))
		}
		cond := "skipped"
		if !p.Skipped() {
			cond = fmt.Sprintf("%.3g", p.Condition)
		}
		fmt.Fprintf(stdout, "%-16s %6g %8d %6d %7d %10s  %s\n", p.Run.Spec.Key(), p.TR, n, k, len(p.Regions), cond, strings.Join(ev, ", "))
		warnings = append(warnings, p.Run.Warnings...)
		warnings = append(warnings, p.Warnings...)
	}
	fmt.Fprintf(stdout, "\ndesign audit (flag: beyond --vif-max, --correlation-max or --censor-max-share)\n")
	fmt.Fprintf(stdout, "%-16s %-28s %-20s %12s  %s\n", "run", "item", "measure", "value", "flag")
	for _, p := range plans {
		for _, a := range p.Audit {
			fmt.Fprintf(stdout, "%-16s %-28s %-20s %12.4g  %s\n", p.Run.Spec.Key(), a.Item, a.Measure, a.Value, a.Flag)
		}
	}
	if len(warnings) > 0 {
		fmt.Fprintf(stdout, "\nwarnings:\n")
		for _, w := range warnings {
			fmt.Fprintf(stdout, "- %s\n", w)
		}
	}
	fmt.Fprintf(stdout, "\nevery design can be fitted (condition numbers of the unit-scaled designs, limit %.0g)\n", fit.ConditionNumberLimit)
	return nil
}
