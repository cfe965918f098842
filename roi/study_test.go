package roi

import (
	"bytes"
	"compress/gzip"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

const studyName = "data/study.csv"

func TestParseStudyRefuses(t *testing.T) {
	const head = "subject,session,run,tr,signals\n"
	cases := []badCase{
		{"no signals column", "subject,run,tr\n01,1,2\n", 1, 0,
			[]string{`no column "signals"`, `the header has "subject", "run", "tr"`}},
		{"no tr nor signals column", "subject,run\n01,1\n", 1, 0, []string{`no columns "tr" and "signals"`}},
		{"empty subject", head + "01,,1,2,a.csv\n,,2,2,b.csv\n", 3, 1, []string{"empty cell", `column "subject"`}},
		{"empty run", head + "01,,,2,a.csv\n", 2, 3, []string{"empty cell", `column "run"`, "a run label"}},
		{"empty signals", head + "01,,1,2,\n", 2, 5, []string{"empty cell", `column "signals"`}},
		{"n/a signals", head + "01,,1,2,n/a\n", 2, 5, []string{`missing value "n/a"`, `column "signals"`}},
		{"empty tr", head + "01,,1,,a.csv\n", 2, 4, []string{"empty cell", `column "tr"`}},
		{"tr zero", head + "01,,1,0,a.csv\n", 2, 4, []string{"tr 0 is not more than 0", `column "tr"`, "seconds"}},
		{"tr negative", head + "01,,1,-2,a.csv\n", 2, 4, []string{"tr -2 is not more than 0"}},
		{"tr not a number", head + "01,,1,2s,a.csv\n", 2, 4, []string{`"2s" is not a number`, `column "tr"`}},
		{"tr in milliseconds", head + "01,,1,2000,a.csv\n", 2, 4,
			[]string{"tr 2000", "looks like milliseconds", "tr is in seconds", "would be 2 s"}},
		{"tr Inf", head + "01,,1,Inf,a.csv\n", 2, 4, []string{`"Inf" is not a finite number`}},
		{"repeated run", head + "01,,1,2,a.csv\n02,,1,2,b.csv\n01,,1,2,c.csv\n", 4, 0,
			[]string{`subject "01", session "", run "1" again`, "line 2 has the same run"}},
		{"repeated run in a session", head + "01,pre,1,2,a.csv\n01,post,1,2,b.csv\n\n01,post,1,2,c.csv\n", 5, 0,
			[]string{`session "post"`, "line 3 has the same run"}},
		{"label with a slash", head + "01/02,,1,2,a.csv\n", 2, 1, []string{`"01/02" contains /`, "output files"}},
		{"two runs with one name", head + "01,,1_2,2,a.csv\n01_1,,2,2,b.csv\n", 3, 0,
			[]string{`subject "01_1", session "", run "2" make the run name "01_1_2", as line 2 does`, "its own name"}},
		{"a session label and a run label with one name", head + "01,,a_1,2,a.csv\n01,a,1,2,b.csv\n", 3, 0,
			[]string{`run name "01_a_1", as line 2 does`}},
		{"header only", head, 1, 0, []string{"a header and no runs"}},
		{"empty file", "", 0, 0, []string{"the file is empty"}},
		{"ragged row", head + "01,,1,2\n", 2, 0, []string{"found 4 cells", "expected 5 cells"}},
		{"known column twice in different case", "subject,run,tr,signals,Subject\n01,1,2,a.csv,02\n", 1, 5,
			[]string{`column 5 is named "Subject" and column 1 "subject"`}},
		{"decimal comma tr", "subject;run;tr;signals\n01;1;2,5;a.csv\n", 2, 3, []string{"decimal comma"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := ParseStudy(studyName, strings.NewReader(c.input))
			checkInputError(t, err, studyName, c.line, c.col, c.frags...)
		})
	}
}

func TestParseStudyReads(t *testing.T) {
	abs := filepath.Join(string(filepath.Separator), "abs", "s.csv")
	input := "\ufeffSubject ; Run;TR;signals;events;confounds;site\r\n" +
		"01;1;2;sub-01/run-1.csv;sub-01/ev.tsv;n/a;A\r\n" +
		"\r\n" +
		"01;2;2.5;" + abs + ";;conf.tsv;B\r\n"
	st, err := ParseStudy(studyName, strings.NewReader(input))
	if err != nil {
		t.Fatal(err)
	}
	if st.Path != studyName || st.Dir != "data" {
		t.Errorf("Path %q, Dir %q; want %q, %q", st.Path, st.Dir, studyName, "data")
	}
	want := []RunSpec{
		{Subject: "01", Run: "1", TR: 2, Signals: filepath.Join("data", "sub-01", "run-1.csv"),
			Events: filepath.Join("data", "sub-01", "ev.tsv"), Line: 2, Study: studyName},
		{Subject: "01", Run: "2", TR: 2.5, Signals: abs, Confounds: filepath.Join("data", "conf.tsv"), Line: 4, Study: studyName},
	}
	if len(st.Runs) != len(want) {
		t.Fatalf("%d runs; want %d: %+v", len(st.Runs), len(want), st.Runs)
	}
	for i := range want {
		if st.Runs[i] != want[i] {
			t.Errorf("run %d = %+v; want %+v", i, st.Runs[i], want[i])
		}
	}
	if k := st.Runs[1].Key(); k != "01_2" {
		t.Errorf("Key() = %q; want 01_2", k)
	}
}

func TestReadStudyFile(t *testing.T) {
	path := "../testdata/roi/study/study.csv"
	st, err := ReadStudy(path)
	if err != nil {
		t.Fatal(err)
	}
	if len(st.Runs) != 2 {
		t.Fatalf("%d runs; want 2", len(st.Runs))
	}
	r := st.Runs[0]
	dir := filepath.Join("..", "testdata", "roi", "study")
	if r.Signals != filepath.Join(dir, "sub-01", "run-1_signals.csv") ||
		r.Confounds != filepath.Join(dir, "sub-01", "run-1_confounds.tsv") || r.Session != "" || r.Line != 2 {
		t.Errorf("run 1 = %+v", r)
	}
	if st.Runs[1].Confounds != "" || st.Runs[1].Line != 3 {
		t.Errorf("run 2 = %+v; want no confounds, line 3", st.Runs[1])
	}
	// The same table compressed, in another folder, reads the same rows
	// with paths resolved against its own folder.
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var gz bytes.Buffer
	zw := gzip.NewWriter(&gz)
	zw.Write(raw)
	zw.Close()
	dir2 := t.TempDir()
	writeFiles(t, dir2, map[string]string{"study.csv.gz": gz.String()})
	st2, err := ReadStudy(filepath.Join(dir2, "study.csv.gz"))
	if err != nil {
		t.Fatal(err)
	}
	if len(st2.Runs) != 2 || st2.Runs[1].Signals != filepath.Join(dir2, "sub-01", "run-2_signals.csv.gz") {
		t.Errorf("compressed study: %+v", st2.Runs)
	}
	_, err = ReadStudy("../testdata/roi/study/nothere.csv")
	checkInputError(t, err, "../testdata/roi/study/nothere.csv", 0, 0, "does not exist")
}

func TestSingleRun(t *testing.T) {
	spec, err := SingleRun("s.csv", "e.tsv", "", 2)
	if err != nil {
		t.Fatal(err)
	}
	want := RunSpec{Subject: "sub", Run: "1", TR: 2, Signals: "s.csv", Events: "e.tsv"}
	if spec != want {
		t.Errorf("SingleRun = %+v; want %+v", spec, want)
	}
	cases := []struct {
		name    string
		signals string
		tr      float64
		file    string
		frags   []string
	}{
		{"tr zero", "s.csv", 0, "tr", []string{"tr 0 is not more than 0"}},
		{"tr negative", "s.csv", -1.5, "tr", []string{"tr -1.5 is not more than 0"}},
		{"tr NaN", "s.csv", math.NaN(), "tr", []string{"tr NaN is not more than 0"}},
		{"tr in milliseconds", "s.csv", 2500, "tr", []string{"looks like milliseconds", "would be 2.5"}},
		{"no signals", "", 2, "signals", []string{"no signals table"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := SingleRun(c.signals, "", "", c.tr)
			checkInputError(t, err, c.file, 0, 0, c.frags...)
		})
	}
}
