// Command profile runs the first-level pipeline on a study with a CPU
// profile, to find where the time goes: go run ./bench/profile STUDY OUT.
package main

import (
	"fmt"
	"os"
	"runtime/pprof"
	"time"

	"github.com/tessera-fmri/tessera/fit"
	"github.com/tessera-fmri/tessera/report"
	"github.com/tessera-fmri/tessera/roi"
)

func main() {
	f, _ := os.Create(os.Args[2] + ".prof")
	pprof.StartCPUProfile(f)
	defer pprof.StopCPUProfile()
	t0 := time.Now()
	st, err := roi.ReadStudy(os.Args[1])
	if err != nil {
		panic(err)
	}
	noise, _ := fit.ParseNoise("ar1")
	o := fit.Options{SliceRef: 0.5, Highpass: 128, HRF: fit.HRFDoubleGamma, Noise: noise, Jobs: 1}
	var runs []*roi.Run
	for _, s := range st.Runs {
		r, err := roi.LoadRun(s, roi.LoadOptions{})
		if err != nil {
			panic(err)
		}
		runs = append(runs, r)
	}
	t1 := time.Now()
	plans, err := fit.Plan(runs, o)
	if err != nil {
		panic(err)
	}
	t2 := time.Now()
	res, err := fit.FitStudy(plans, o)
	if err != nil {
		panic(err)
	}
	t3 := time.Now()
	out, _ := report.NewOutput(os.Args[2])
	if err := report.WriteTables(out, res); err != nil {
		panic(err)
	}
	out.Commit()
	t4 := time.Now()
	fmt.Printf("read %v plan %v fit %v write %v\n", t1.Sub(t0), t2.Sub(t1), t3.Sub(t2), t4.Sub(t3))
}
