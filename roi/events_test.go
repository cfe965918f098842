package roi

import (
	"strings"
	"testing"
)

func TestParseEventsRefuses(t *testing.T) {
	cases := []badCase{
		{"negative duration", "onset,duration,condition\n0,2,flash\n10,-1,hum\n", 3, 2,
			[]string{`"-1" is a negative duration`, `column "duration"`, "0 or more"}},
		{"missing onset cell", "onset\tduration\ttrial_type\nn/a\t2\tflash\n", 2, 1,
			[]string{`missing value "n/a"`, `column "onset"`, "every event needs one"}},
		{"empty duration cell", "onset,duration,condition\n1,,flash\n", 2, 2, []string{"empty cell", `column "duration"`}},
		{"onset not a number", "onset,duration,condition\n1s,2,flash\n", 2, 1, []string{`"1s" is not a number`}},
		{"onset Inf", "onset,duration,condition\nInf,2,flash\n", 2, 1, []string{`"Inf" is not a finite number`}},
		{"duration overflows", "onset,duration,condition\n1,2e999,flash\n", 2, 2, []string{"overflows"}},
		{"onset with a decimal comma", "onset;duration;condition\n1,5;2;flash\n", 2, 1, []string{"decimal comma"}},
		{"missing amplitude cell", "onset,duration,condition,amplitude\n1,2,flash,1\n3,2,hum,NA\n", 3, 4,
			[]string{`missing value "NA"`, `column "amplitude"`, "leave the amplitude column out"}},
		{"amplitude not a number", "onset,duration,condition,amplitude\n1,2,flash,high\n", 2, 4, []string{`"high" is not a number`}},
		{"no onset column", "start,duration,condition\n1,2,flash\n", 1, 0,
			[]string{`no column "onset"`, `the header has "start", "duration", "condition"`}},
		{"no condition column", "onset,duration\n1,2\n", 1, 0, []string{`no column "condition" (or "trial_type")`}},
		{"ragged row", "onset,duration,condition\n1,2,flash,extra\n", 2, 0, []string{"found 4 cells", "expected 3 cells"}},
		{"trailing tab", "onset\tduration\tcondition\n1\t2\tflash\t\n", 2, 0, []string{"ends with a tab"}},
		{"duplicate column", "onset,duration,condition,onset\n1,2,flash,3\n", 1, 4, []string{`named "onset", like column 1`}},
		{"empty file", "", 0, 0, []string{"the file is empty"}},
		{"invalid UTF-8 in a condition", "onset,duration,condition\n1,2,d\xe9but\n", 2, 0, []string{"0xE9"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := ParseEvents("events.tsv", strings.NewReader(c.input))
			checkInputError(t, err, "events.tsv", c.line, c.col, c.frags...)
		})
	}
}

func TestParseEventsReads(t *testing.T) {
	cases := []struct {
		name     string
		input    string
		want     []Event
		warnings []string
	}{
		{"columns in any order, amplitude absent",
			"condition,duration,onset\nflash,2,0\nhum,0,10.5\n",
			[]Event{{Onset: 0, Duration: 2, Amplitude: 1, Condition: "flash", Line: 2},
				{Onset: 10.5, Duration: 0, Amplitude: 1, Condition: "hum", Line: 3}}, nil},
		{"amplitude read, names in any case",
			"Onset,DURATION,Condition,Amplitude\n1,2,flash,0.5\n",
			[]Event{{Onset: 1, Duration: 2, Amplitude: 0.5, Condition: "flash", Line: 2}}, nil},
		{"condition wins over trial_type, which is kept",
			"onset\tduration\ttrial_type\tcondition\n1\t2\tgo\tflash\n",
			[]Event{{Onset: 1, Duration: 2, Amplitude: 1, Condition: "flash", Line: 2, Extra: map[string]string{"trial_type": "go"}}}, nil},
		{"n/a and empty conditions skipped with their lines",
			"onset,duration,condition,rt\n1,2,flash,0.4\n3,n/a,n/a,n/a\n5,2,hum,0.5\n7,2,,0.6\n",
			[]Event{{Onset: 1, Duration: 2, Amplitude: 1, Condition: "flash", Line: 2, Extra: map[string]string{"rt": "0.4"}},
				{Onset: 5, Duration: 2, Amplitude: 1, Condition: "hum", Line: 4, Extra: map[string]string{"rt": "0.5"}}},
			[]string{"events.tsv: lines 3, 5 have no condition (empty or a missing-value token) and were skipped"}},
		{"one n/a row",
			"onset\tduration\ttrial_type\n1\t2\tflash\n3\t2\tn/a\n",
			[]Event{{Onset: 1, Duration: 2, Amplitude: 1, Condition: "flash", Line: 2}},
			[]string{"events.tsv: line 3 has condition n/a and was skipped"}},
		{"blank lines and a multi-line quoted cell keep line numbers",
			"onset,duration,condition,note\n\n1,2,flash,\"two\nlines\"\n\n3,2,\"hum, low\",x\n",
			[]Event{{Onset: 1, Duration: 2, Amplitude: 1, Condition: "flash", Line: 3, Extra: map[string]string{"note": "two\nlines"}},
				{Onset: 3, Duration: 2, Amplitude: 1, Condition: "hum, low", Line: 6, Extra: map[string]string{"note": "x"}}}, nil},
		{"header only", "onset,duration,condition\n", nil,
			[]string{"events.tsv: the table has a header and no events"}},
		{"negative onset accepted", "onset,duration,condition\n-2,1,cue\n",
			[]Event{{Onset: -2, Duration: 1, Amplitude: 1, Condition: "cue", Line: 2}}, nil},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			ev, err := ParseEvents("events.tsv", strings.NewReader(c.input))
			if err != nil {
				t.Fatal(err)
			}
			if len(ev.Events) != len(c.want) {
				t.Fatalf("%d events; want %d: %+v", len(ev.Events), len(c.want), ev.Events)
			}
			for i, w := range c.want {
				checkEvent(t, ev.Events[i], w)
			}
			if strings.Join(ev.Warnings, "\n") != strings.Join(c.warnings, "\n") {
				t.Errorf("Warnings = %q; want %q", ev.Warnings, c.warnings)
			}
		})
	}
}

func checkEvent(t *testing.T, got, want Event) {
	t.Helper()
	if got.Onset != want.Onset || got.Duration != want.Duration || got.Amplitude != want.Amplitude ||
		got.Condition != want.Condition || got.Line != want.Line || len(got.Extra) != len(want.Extra) {
		t.Errorf("event = %+v; want %+v", got, want)
		return
	}
	for k, v := range want.Extra {
		if got.Extra[k] != v {
			t.Errorf("line %d: Extra[%q] = %q; want %q", got.Line, k, got.Extra[k], v)
		}
	}
}
