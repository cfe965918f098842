package roi

import (
	"slices"
	"strings"
	"testing"
)

// The real BIDS event tables in testdata/bids (see its README) read as they
// are. The expected counts were taken from the files with a separate tool
// (awk over the tab-separated cells), not from this reader.
func TestReadEventsBIDS(t *testing.T) {
	cases := []struct {
		name       string
		path       string
		events     int
		conditions []string
		extra      []string // extra columns, sorted
		first      Event
		warning    string // the one warning, or ""
	}{
		{
			name:       "ds001 balloon analog risk task",
			path:       "../testdata/bids/ds001/sub-01/func/sub-01_task-balloonanalogrisktask_run-01_events.tsv",
			events:     158,
			conditions: []string{"pumps_demean", "explode_demean", "cash_demean", "control_pumps_demean"},
			extra:      []string{"cash_demean", "control_pumps_demean", "explode_demean", "pumps_demean", "response_time"},
			first: Event{Onset: 0.061, Duration: 0.772, Amplitude: 1, Condition: "pumps_demean", Line: 2,
				Extra: map[string]string{"cash_demean": "n/a", "control_pumps_demean": "n/a", "explode_demean": "n/a",
					"pumps_demean": "-2.000", "response_time": "2.420"}},
		},
		{
			name:       "ds002 classification learning, n/a rows",
			path:       "../testdata/bids/ds002/sub-01/func/sub-01_task-deterministicclassification_run-01_events.tsv",
			events:     50,
			conditions: []string{"feedback"},
			extra:      []string{"Correct", "Feedback", "Response", "StimCond", "StimulusNum", "TrialNum", "feedback", "response_time"},
			first: Event{Onset: 0.224, Duration: 2, Amplitude: 1, Condition: "feedback", Line: 2,
				Extra: map[string]string{"feedback": "-1.280", "TrialNum": "1", "StimCond": "2", "StimulusNum": "13",
					"Response": "L", "response_time": "1.924", "Correct": "0", "Feedback": "R"}},
			warning: "../testdata/bids/ds002/sub-01/func/sub-01_task-deterministicclassification_run-01_events.tsv: " +
				"lines 7-9, 15-17, 23-25, 31-33, 39-41, 47-49, 55-57, 63-65, 71-73, 79-81 have condition n/a and were skipped",
		},
		{
			name:       "ds005 mixed gambles, names with spaces",
			path:       "../testdata/bids/ds005/sub-01/func/sub-01_task-mixedgamblestask_run-01_events.tsv",
			events:     86,
			conditions: []string{"parametric gain"},
			extra: []string{"PTval", "distance from indifference", "gain", "loss", "parametric gain", "parametric loss",
				"respcat", "respnum", "response_time"},
			first: Event{Onset: 0, Duration: 3, Amplitude: 1, Condition: "parametric gain", Line: 2,
				Extra: map[string]string{"parametric gain": "-0.139", "distance from indifference": "n/a",
					"parametric loss": "n/a", "gain": "20", "loss": "15", "PTval": "5.150", "respnum": "0",
					"respcat": "-1", "response_time": "0.000"}},
		},
		{
			name:       "ds114 line bisection, weight column, session",
			path:       "../testdata/bids/ds114/sub-01/ses-test/func/sub-01_ses-test_task-linebisection_events.tsv",
			events:     160,
			conditions: []string{"Incorrect_Task", "Correct_Task", "No_Response_Task", "Response_Control", "No_Response_Control"},
			extra:      []string{"weight"},
			first: Event{Onset: 24.3065, Duration: 1, Amplitude: 1, Condition: "Incorrect_Task", Line: 2,
				Extra: map[string]string{"weight": "1.0"}},
		},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			ev, err := ReadEvents(c.path)
			if err != nil {
				t.Fatal(err)
			}
			if len(ev.Events) != c.events {
				t.Errorf("%d events; want %d", len(ev.Events), c.events)
			}
			if got := ev.Conditions(); !slices.Equal(got, c.conditions) {
				t.Errorf("conditions %q; want %q", got, c.conditions)
			}
			for _, e := range ev.Events {
				keys := make([]string, 0, len(e.Extra))
				for k := range e.Extra {
					keys = append(keys, k)
				}
				slices.Sort(keys)
				if !slices.Equal(keys, c.extra) {
					t.Fatalf("line %d: extra columns %q; want %q", e.Line, keys, c.extra)
				}
			}
			if len(ev.Events) > 0 {
				checkEvent(t, ev.Events[0], c.first)
			}
			var want []string
			if c.warning != "" {
				want = []string{c.warning}
			}
			if !slices.Equal(ev.Warnings, want) {
				t.Errorf("Warnings = %q; want %q", ev.Warnings, want)
			}
		})
	}
}

// The last ds005 event is on the file's last line; its line number must be
// exact.
func TestReadEventsBIDSLastLine(t *testing.T) {
	ev, err := ReadEvents("../testdata/bids/ds005/sub-01/func/sub-01_task-mixedgamblestask_run-01_events.tsv")
	if err != nil {
		t.Fatal(err)
	}
	last := ev.Events[len(ev.Events)-1]
	if last.Line != 87 || last.Onset != 474 || last.Extra["PTval"] != "10.140" {
		t.Errorf("last event %+v; want line 87, onset 474, PTval 10.140", last)
	}
}

func TestReadTableParticipants(t *testing.T) {
	cases := []struct {
		name  string
		path  string
		names []string
		rows  int
		last  []string
	}{
		{"ds001", "../testdata/bids/ds001/participants.tsv", []string{"participant_id", "sex", "age"}, 16,
			[]string{"sub-16", "M", "19"}},
		{"ds114 with CRLF line ends", "../testdata/bids/ds114/participants.tsv", []string{"participant_id", "dominant_hand"}, 10,
			[]string{"sub-10", "left"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			tab, err := ReadTable(c.path)
			if err != nil {
				t.Fatal(err)
			}
			if !slices.Equal(tab.Names, c.names) || len(tab.Rows) != c.rows {
				t.Fatalf("names %q, %d rows; want %q, %d rows", tab.Names, len(tab.Rows), c.names, c.rows)
			}
			if got := tab.Rows[c.rows-1]; !slices.Equal(got, c.last) {
				t.Errorf("last row %q; want %q", got, c.last)
			}
			if tab.Lines[c.rows-1] != c.rows+1 {
				t.Errorf("last row on line %d; want %d", tab.Lines[c.rows-1], c.rows+1)
			}
			for i, row := range tab.Rows {
				if !strings.HasPrefix(row[0], "sub-") {
					t.Errorf("row %d: participant_id %q does not start with sub-", i, row[0])
				}
			}
		})
	}
}
