package roi_test

import (
	"errors"
	"fmt"
	"strings"

	"github.com/tessera-fmri/tessera/roi"
)

func ExampleParseNumeric() {
	const table = "amygdala;insula\n1012.5;987.25\n1013.0;986.5\n"
	n, err := roi.ParseNumeric("signals.csv", strings.NewReader(table), roi.NumericOptions{})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(n.Names, n.Rows(), n.Column("insula"))
	// Output: [amygdala insula] 2 [987.25 986.5]
}

func ExampleInputError() {
	const table = "ridge_a,ridge_b\n1012.5,987.25\n1013.0,12..5\n"
	_, err := roi.ParseNumeric("signals.csv", strings.NewReader(table), roi.NumericOptions{})
	var ie *roi.InputError
	if errors.As(err, &ie) {
		fmt.Println(ie.Line, ie.Column, ie.Field)
	}
	fmt.Println(err)
	// Output:
	// 3 2 ridge_b
	// signals.csv:3:2: "12..5" is not a number (column "ridge_b"); expected a number with a decimal point
}

func ExampleParseEvents() {
	const table = "onset\tduration\ttrial_type\tresponse_time\n0\t2\tflash\t0.41\n4\t2\tn/a\tn/a\n8\t2\thum\t0.38\n"
	ev, err := roi.ParseEvents("events.tsv", strings.NewReader(table))
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(ev.Conditions(), ev.Events[1].Onset, ev.Events[1].Extra["response_time"])
	fmt.Println(ev.Warnings[0])
	// Output:
	// [flash hum] 8 0.38
	// events.tsv: line 3 has condition n/a and was skipped
}
