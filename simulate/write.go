package simulate

import (
	"bufio"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
)

// Write puts the study in dir: study.csv, one folder per subject with each
// run's signals (CSV), events (tab-separated, BIDS column names) and
// confounds (CSV, motion columns tx..rz), and truth.csv
// (subject,session,run,region,condition,psc).
func (s *Study) Write(dir string) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	study := [][]string{{"subject", "run", "tr", "signals", "events", "confounds"}}
	for _, r := range s.Runs {
		sub := "sub-" + r.Subject
		if err := os.MkdirAll(filepath.Join(dir, sub), 0o755); err != nil {
			return err
		}
		base := fmt.Sprintf("%s/%s_run-%s_", sub, sub, r.Run)
		study = append(study, []string{r.Subject, r.Run, num(r.TR), base + "signals.csv", base + "events.tsv", base + "confounds.csv"})
		if err := writeColumns(filepath.Join(dir, base+"signals.csv"), r.Regions, r.Signals); err != nil {
			return err
		}
		if err := writeColumns(filepath.Join(dir, base+"confounds.csv"), MotionNames, r.Motion); err != nil {
			return err
		}
		ev := [][]string{{"onset", "duration", "trial_type"}}
		for _, e := range r.Events {
			ev = append(ev, []string{num(e.Onset), num(e.Duration), e.Condition})
		}
		if err := writeRows(filepath.Join(dir, base+"events.tsv"), '\t', ev); err != nil {
			return err
		}
	}
	if err := writeRows(filepath.Join(dir, "study.csv"), ',', study); err != nil {
		return err
	}
	truth := [][]string{{"subject", "session", "run", "region", "condition", "psc"}}
	for _, t := range s.Truth {
		truth = append(truth, []string{t.Subject, "", t.Run, t.Region, t.Condition, num(t.PSC)})
	}
	return writeRows(filepath.Join(dir, "truth.csv"), ',', truth)
}

func num(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// writeColumns writes column-major data with a header; values keep 10
// significant digits, well beyond the precision of any scanner.
func writeColumns(path string, names []string, cols [][]float64) error {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	w := bufio.NewWriter(f)
	for j, n := range names {
		if j > 0 {
			w.WriteByte(',')
		}
		w.WriteString(n)
	}
	w.WriteByte('\n')
	var buf []byte
	for t := range cols[0] {
		for j := range cols {
			if j > 0 {
				w.WriteByte(',')
			}
			buf = strconv.AppendFloat(buf[:0], cols[j][t], 'g', 10, 64)
			w.Write(buf)
		}
		w.WriteByte('\n')
	}
	if err := w.Flush(); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

func writeRows(path string, sep byte, rows [][]string) error {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	w := bufio.NewWriter(f)
	for _, r := range rows {
		for j, c := range r {
			if j > 0 {
				w.WriteByte(sep)
			}
			w.WriteString(c)
		}
		w.WriteByte('\n')
	}
	if err := w.Flush(); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}
