package roi

import (
	"math"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

func TestLoadRunFromStudy(t *testing.T) {
	st, err := ReadStudy("../testdata/roi/study/study.csv")
	if err != nil {
		t.Fatal(err)
	}
	run, err := LoadRun(st.Runs[0], LoadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if run.Signals.Rows() != 12 || run.Confounds.Rows() != 12 {
		t.Fatalf("%d signal rows, %d confound rows; want 12 and 12", run.Signals.Rows(), run.Confounds.Rows())
	}
	fd := run.Confounds.Column("fd_mm")
	if !math.IsNaN(fd[0]) || fd[1] != 0.05 {
		t.Errorf("fd_mm starts %v; want NaN then 0.05", fd[:2])
	}
	var onsets []float64
	for _, e := range run.Events.Events {
		onsets = append(onsets, e.Onset)
	}
	if !slices.Equal(onsets, []float64{0, 6, 12, 18}) {
		t.Errorf("onsets %v; want 0, 6, 12, 18 (30 is after the run's end at 24 s)", onsets)
	}
	wantWarn := []string{run.Events.Path + ": line 6 has an onset at or after the end of the run at 24 s (12 volumes of 2 s) and was dropped"}
	if !slices.Equal(run.Warnings, wantWarn) {
		t.Errorf("Warnings = %q; want %q", run.Warnings, wantWarn)
	}

	run2, err := LoadRun(st.Runs[1], LoadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if run2.Confounds != nil || run2.Signals.Rows() != 12 || len(run2.Events.Events) != 2 || len(run2.Warnings) != 0 {
		t.Errorf("run 2: confounds %v, %d rows, %d events, warnings %q; want none, 12, 2, none",
			run2.Confounds, run2.Signals.Rows(), len(run2.Events.Events), run2.Warnings)
	}
	if !slices.Equal(run2.Signals.Cols[0], run.Signals.Cols[0]) {
		t.Errorf("compressed signals differ from the plain ones")
	}
}

func TestLoadRunRefuses(t *testing.T) {
	const signals12 = "a,b\n" + "1,2\n1,2\n1,2\n1,2\n1,2\n1,2\n1,2\n1,2\n1,2\n1,2\n1,2\n1,2\n"
	const study = "study.csv"
	type want struct {
		file      string // relative to the case folder
		line, col int
		frags     []string
		fromStudy bool // the error is located in the study table
	}
	cases := []struct {
		name  string
		files map[string]string
		row   string // the study row after the header subject,run,tr,signals,events,confounds
		opt   LoadOptions
		want  want
	}{
		{"missing signals file", map[string]string{}, "01,1,2,sub/s.csv,,",
			LoadOptions{}, want{line: 2, frags: []string{`column "signals"`, "sub/s.csv", "does not exist"}, fromStudy: true}},
		{"missing events file", map[string]string{"s.csv": signals12}, "01,1,2,s.csv,ev.tsv,",
			LoadOptions{}, want{line: 2, frags: []string{`column "events"`, "ev.tsv", "does not exist"}, fromStudy: true}},
		{"confounds is a folder", map[string]string{"s.csv": signals12, "c/x": ""}, "01,1,2,s.csv,,c",
			LoadOptions{}, want{line: 2, frags: []string{`column "confounds"`, "is a folder"}, fromStudy: true}},
		{"row counts differ", map[string]string{"s.csv": signals12, "c.tsv": "tx\n1\n2\n3\n4\n5\n6\n7\n8\n9\n10\n11\n"},
			"01,1,2,s.csv,,c.tsv", LoadOptions{}, want{file: "c.tsv", frags: []string{"11 rows", "s.csv has 12", "one row per volume"}}},
		{"all onsets beyond the end", map[string]string{"s.csv": signals12,
			"e.tsv": "onset\tduration\ttrial_type\n2000\t1\tgo\n12000\t1\tgo\n"},
			"01,1,2,s.csv,e.tsv,", LoadOptions{}, want{file: "e.tsv",
				frags: []string{"every onset (2 events, from 2000 to 12000)", "end of the run at 24 s", "volumes or milliseconds", "needs seconds"}}},
		{"missing signal value", map[string]string{"s.csv": "a,b\n1,2\n3,n/a\n"}, "01,1,2,s.csv,,",
			LoadOptions{}, want{file: "s.csv", line: 3, col: 2, frags: []string{`missing value "n/a"`, "--missing censor"}}},
		{"infinite confound", map[string]string{"s.csv": "a\n1\n2\n", "c.csv": "tx\n1\nInf\n"}, "01,1,2,s.csv,,c.csv",
			LoadOptions{MissingCensor: true}, want{file: "c.csv", line: 3, col: 1, frags: []string{"not a finite number"}}},
		{"bad events table", map[string]string{"s.csv": signals12, "e.tsv": "onset,duration,condition\n1,-2,go\n"},
			"01,1,2,s.csv,e.tsv,", LoadOptions{}, want{file: "e.tsv", line: 2, col: 2, frags: []string{"negative duration"}}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			c.files[study] = "subject,run,tr,signals,events,confounds\n" + c.row + "\n"
			writeFiles(t, dir, c.files)
			st, err := ReadStudy(filepath.Join(dir, study))
			if err != nil {
				t.Fatal(err)
			}
			_, err = LoadRun(st.Runs[0], c.opt)
			file := filepath.Join(dir, c.want.file)
			if c.want.fromStudy {
				file = filepath.Join(dir, study)
			}
			checkInputError(t, err, file, c.want.line, c.want.col, c.want.frags...)
		})
	}
}

func TestLoadRunCensorMode(t *testing.T) {
	dir := t.TempDir()
	writeFiles(t, dir, map[string]string{"s.csv": "a,b\n1,2\nn/a,3\nInf,1e999\n5,6\n"})
	spec, err := SingleRun(filepath.Join(dir, "s.csv"), "", "", 1)
	if err != nil {
		t.Fatal(err)
	}
	run, err := LoadRun(spec, LoadOptions{MissingCensor: true})
	if err != nil {
		t.Fatal(err)
	}
	nan := math.NaN()
	checkNumeric(t, run.Signals, []string{"a", "b"}, [][]float64{{1, nan, nan, 5}, {2, 3, nan, 6}})
	if _, err := LoadRun(spec, LoadOptions{}); err == nil {
		t.Error("without censoring a missing signal value was accepted")
	}
}

func TestLoadRunSingleRunMissingFile(t *testing.T) {
	path := filepath.Join(t.TempDir(), "nothere.csv")
	spec, err := SingleRun(path, "", "", 2)
	if err != nil {
		t.Fatal(err)
	}
	_, err = LoadRun(spec, LoadOptions{})
	checkInputError(t, err, path, 0, 0, "does not exist", "signals table")
	if !strings.Contains(err.Error(), "readable signals table") {
		t.Errorf("message %q does not say which table", err)
	}
}
