package report

import (
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"testing"

	"github.com/tessera-fmri/tessera/fit"
	"github.com/tessera-fmri/tessera/simulate"
)

// awkwardFields are cells that exercise each part of encoding/csv's
// quoting rule: empty, `\.`, commas, quotes, \r and \n, leading ASCII and
// Unicode spaces (U+00A0, U+2003, U+3000 are spaces to unicode.IsSpace;
// U+200B is not), trailing spaces, invalid UTF-8 and ordinary text.
var awkwardFields = []string{
	"", " ", "  ", "\t", "\tx", "x\t", " x", "x ", "a b", `\.`, `\.x`, `x\.`, `\`, ".",
	",", "a,b", ",a", "a,", `"`, `""`, `a"b`, `"a"`, "\n", "a\nb", "\r", "a\r\nb", "\r\n",
	"\u00a0x", "x\u00a0", "\u2003x", "\u3000", "\u200bx", "\u0085x", "\v", "\f", "é", "région",
	"\xff", "\xffa", " \xff", "region_001", "01", "-1.5e-07", "NaN", "skipped:too few volumes",
}

// csvReference encodes records with encoding/csv's Writer (Comma ',',
// UseCRLF false: the settings the tables were written with before).
func csvReference(t *testing.T, records [][]string) []byte {
	t.Helper()
	var b bytes.Buffer
	w := csv.NewWriter(&b)
	for _, r := range records {
		if err := w.Write(r); err != nil {
			t.Fatal(err)
		}
	}
	w.Flush()
	if err := w.Error(); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

// viaTableWriter encodes records with tableWriter.record.
func viaTableWriter(t *testing.T, records [][]string) []byte {
	t.Helper()
	var b bytes.Buffer
	w := newTableWriter(&b, 0)
	for _, r := range records {
		w.record(r)
	}
	if err := w.close(); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

// TestTableWriterMatchesEncodingCSV: every awkward field alone, in pairs,
// and in random records of random awkward pieces is written byte for byte
// as encoding/csv writes it.
func TestTableWriterMatchesEncodingCSV(t *testing.T) {
	var records [][]string
	records = append(records, nil, []string{""}, []string{"", ""})
	for _, f := range awkwardFields {
		records = append(records, []string{f})
		for _, g := range awkwardFields {
			records = append(records, []string{f, g})
		}
	}
	rng := rand.New(rand.NewPCG(1, 2))
	for range 5000 {
		r := make([]string, rng.IntN(6))
		for i := range r {
			var b strings.Builder
			for range rng.IntN(4) {
				b.WriteString(awkwardFields[rng.IntN(len(awkwardFields))])
			}
			r[i] = b.String()
		}
		records = append(records, r)
	}
	want := csvReference(t, records)
	got := viaTableWriter(t, records)
	if !bytes.Equal(got, want) {
		for i, r := range records {
			w, g := csvReference(t, [][]string{r}), viaTableWriter(t, [][]string{r})
			if !bytes.Equal(g, w) {
				t.Fatalf("record %d %q: got %q, encoding/csv writes %q", i, r, g, w)
			}
		}
		t.Fatal("outputs differ, though every record alone agrees")
	}
}

// FuzzTableWriter compares tableWriter with encoding/csv on arbitrary
// pairs of fields (go test runs the seeds; go test -fuzz explores).
func FuzzTableWriter(f *testing.F) {
	for _, s := range awkwardFields {
		f.Add(s, "x")
	}
	f.Fuzz(func(t *testing.T, a, b string) {
		records := [][]string{{a}, {a, b}, {b, a, b}}
		if got, want := viaTableWriter(t, records), csvReference(t, records); !bytes.Equal(got, want) {
			t.Fatalf("%q, %q: got %q, encoding/csv writes %q", a, b, got, want)
		}
	})
}

// testNumbers are floats whose formatting has edge cases: zeros, the
// limits of float64, subnormals, the switch between %e and %f forms of
// 'g', numbers near powers of ten, and the missing values.
func testNumbers() []float64 {
	vs := []float64{0, math.Copysign(0, -1), 1, -1, 0.1, 1e-300, 123456789, -2.5, 1e20, 1e21, 1e-4, 1e-5, 1e-7,
		0.000123, 99999.99, 1e6, 123456, 1234567, math.MaxFloat64, -math.MaxFloat64, math.SmallestNonzeroFloat64,
		2.2250738585072014e-308, 1.0 / 3, 2.0 / 3, math.Pi, 5e-324, 9007199254740993,
		math.NaN(), math.Inf(1), math.Inf(-1)}
	rng := rand.New(rand.NewPCG(3, 4))
	for range 20000 {
		v := math.Float64frombits(rng.Uint64())
		vs = append(vs, v, rng.NormFloat64()*math.Pow(10, float64(rng.IntN(40)-20)))
	}
	return vs
}

// TestAppendNum: AppendNum and Num give strconv.FormatFloat(v, 'g', -1, 64)
// for finite numbers and nothing for NaN and infinities, and AppendNum
// keeps what dst held.
func TestAppendNum(t *testing.T) {
	for _, v := range testNumbers() {
		want := ""
		if !math.IsNaN(v) && !math.IsInf(v, 0) {
			want = strconv.FormatFloat(v, 'g', -1, 64)
		}
		if got := string(AppendNum([]byte("x,"), v)); got != "x,"+want {
			t.Fatalf("AppendNum(%v) = %q, want %q", v, got, "x,"+want)
		}
		if got := Num(v); got != want {
			t.Fatalf("Num(%v) = %q, want %q", v, got, want)
		}
	}
}

// TestTypedCells: the number, integer, pre-encoded and number-list cells
// give the bytes that encoding/csv writes for the strings the tables used
// to build (Num, strconv.Itoa, strings.Join of Num with spaces), a leading
// NaN in a list included (which leaves a leading space, so quotes).
func TestTypedCells(t *testing.T) {
	nums := testNumbers()
	rng := rand.New(rand.NewPCG(5, 6))
	var records [][]string
	var b bytes.Buffer
	w := newTableWriter(&b, 0)
	var run cellRun
	for i := range 3000 {
		key := []string{awkwardFields[rng.IntN(len(awkwardFields))], awkwardFields[rng.IntN(len(awkwardFields))]}
		v := nums[rng.IntN(len(nums))]
		n := rng.IntN(2000) - 1000
		list := make([]float64, rng.IntN(4))
		strs := make([]string, len(list))
		for j := range list {
			list[j] = nums[rng.IntN(len(nums))]
			if rng.IntN(4) == 0 {
				list[j] = math.NaN()
			}
			strs[j] = legacyNum(list[j])
		}
		records = append(records, append(key, legacyNum(v), strconv.Itoa(n), strings.Join(strs, " "), strconv.Itoa(i)))
		run.set(key...)
		w.cells(&run)
		w.num(v)
		w.integer(n)
		w.nums(list)
		w.integer(i)
		w.end()
	}
	if err := w.close(); err != nil {
		t.Fatal(err)
	}
	if want := csvReference(t, records); !bytes.Equal(b.Bytes(), want) {
		got := bytes.Split(b.Bytes(), []byte("\n"))
		for i, line := range bytes.Split(want, []byte("\n")) {
			if i >= len(got) || !bytes.Equal(got[i], line) {
				t.Fatalf("row %d: got %q, encoding/csv writes %q", i, got[min(i, len(got)-1)], line)
			}
		}
		t.Fatal("outputs differ")
	}
}

// failAfter accepts n bytes, then fails every write.
type failAfter struct {
	n   int
	err error
}

func (f *failAfter) Write(p []byte) (int, error) {
	if len(p) > f.n {
		f.n = 0
		return 0, f.err
	}
	f.n -= len(p)
	return len(p), nil
}

// TestParts: rows formatted in parts by several goroutines come out in part
// order, the same bytes as one writer appending every part in turn (parts
// of very different sizes, more parts than buffers), and a write error is
// returned without the writers hanging.
func TestParts(t *testing.T) {
	var parts []func(*tableWriter)
	for p := range 200 {
		rows := (p * 37) % 500
		parts = append(parts, func(t *tableWriter) {
			for r := range rows {
				t.integer(p)
				t.integer(r)
				t.str("part " + strconv.Itoa(p))
				t.num(float64(r) / 7)
				t.end()
			}
		})
	}
	var one bytes.Buffer
	seq := newTableWriter(&one, 4)
	seq.record([]string{"part", "row", "name", "value"})
	for _, p := range parts {
		p(seq)
	}
	if err := seq.close(); err != nil {
		t.Fatal(err)
	}
	for _, workers := range []int{1, 2, 3, 8} {
		var b bytes.Buffer
		w := newTableWriter(&b, 4)
		w.record([]string{"part", "row", "name", "value"})
		if err := w.parts(parts, workers); err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(b.Bytes(), one.Bytes()) {
			t.Errorf("%d workers: %d bytes differ from the %d written in turn", workers, b.Len(), one.Len())
		}
		full := errors.New("disk full")
		for _, n := range []int{0, 10, one.Len() / 2} {
			w := newTableWriter(&failAfter{n: n, err: full}, 4)
			w.record([]string{"part", "row", "name", "value"})
			if err := w.parts(parts, workers); !errors.Is(err, full) {
				t.Errorf("%d workers, failing after %d bytes: error %v, want %v", workers, n, err, full)
			}
		}
	}
}

// TestParallelFirstError: parallel runs every job and returns the error of
// the first failing job in job order, not the first to fail in time (the
// third job fails before the second does).
func TestParallelFirstError(t *testing.T) {
	var ran atomic.Int64
	second, third := errors.New("second job"), errors.New("third job")
	thirdDone := make(chan struct{})
	err := parallel(
		func() error { ran.Add(1); return nil },
		func() error { <-thirdDone; ran.Add(1); return second },
		func() error { defer close(thirdDone); ran.Add(1); return third },
		func() error { ran.Add(1); return nil },
	)
	if err != second {
		t.Errorf("error %v, want %v", err, second)
	}
	if ran.Load() != 4 {
		t.Errorf("%d jobs ran, want 4", ran.Load())
	}
	if err := parallel(func() error { return nil }, func() error { return nil }); err != nil {
		t.Errorf("no job failed, got %v", err)
	}
}

// TestRankOrder: rankOrder gives the order sort.SliceStable gives the rows
// themselves, with ties and NaNs (which compare false both ways).
func TestRankOrder(t *testing.T) {
	type row struct {
		name string
		v    float64
	}
	rng := rand.New(rand.NewPCG(7, 8))
	for trial := range 200 {
		n := rng.IntN(300)
		rows := make([]row, n)
		vs := make([]float64, n)
		for i := range rows {
			v := float64(rng.IntN(20) - 10)
			if rng.IntN(6) == 0 {
				v = math.NaN()
			}
			rows[i] = row{fmt.Sprint(i), v}
			vs[i] = math.Abs(v)
		}
		order := rankOrder(vs, largerFirst)
		sort.SliceStable(rows, func(i, j int) bool { return math.Abs(rows[i].v) > math.Abs(rows[j].v) })
		for i, k := range order {
			if rows[i].name != strconv.Itoa(k) {
				t.Fatalf("trial %d: position %d holds row %d, sort.SliceStable puts %s there", trial, i, k, rows[i].name)
			}
		}
	}
}

// TestConcurrentCreate: files created and written from many goroutines at
// once are all committed with their content.
func TestConcurrentCreate(t *testing.T) {
	dir := t.TempDir()
	o, err := NewOutput(dir)
	if err != nil {
		t.Fatal(err)
	}
	var wg sync.WaitGroup
	errs := make([]error, 40)
	for i := range errs {
		wg.Go(func() {
			f, err := o.Create(fmt.Sprintf("d%d/f%d.csv", i%3, i))
			if err == nil {
				_, err = f.WriteString(strings.Repeat(strconv.Itoa(i)+"\n", 1000*i))
			}
			errs[i] = err
		})
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			t.Fatal(err)
		}
	}
	if err := o.Commit(); err != nil {
		t.Fatal(err)
	}
	for i := range errs {
		b, err := os.ReadFile(filepath.Join(dir, fmt.Sprintf("d%d/f%d.csv", i%3, i)))
		if err != nil || string(b) != strings.Repeat(strconv.Itoa(i)+"\n", 1000*i) {
			t.Errorf("file %d: %d bytes, %v", i, len(b), err)
		}
	}
}

// legacyNum is Num as it was written before AppendNum: FormatFloat's
// shortest form, empty for NaN and infinities.
func legacyNum(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return ""
	}
	return strconv.FormatFloat(v, 'g', -1, 64)
}

// legacyTables writes estimates.csv, diagnostics.csv, autocorrelation.csv
// and the design tables of res the way the writers did before the fast
// appender: every cell a string (legacyNum, strconv.Itoa, strings.Join),
// every row through encoding/csv.
func legacyTables(t *testing.T, res *fit.StudyResult) map[string][]byte {
	t.Helper()
	est := [][]string{Estimates.Header()}
	diag := [][]string{Diagnostics.Header()}
	acf := [][]string{Autocorrelation.Header()}
	out := map[string][]byte{}
	for _, rr := range res.Runs {
		s := rr.Plan.Run.Spec
		d := rr.Plan.Design
		design := [][]string{{}}
		for _, term := range d.Terms {
			design[0] = append(design[0], term.Name)
		}
		n, k := d.X.Dims()
		for i := range n {
			row := make([]string, k)
			for j := range k {
				row[j] = legacyNum(d.X.At(i, j))
			}
			design = append(design, row)
		}
		out["design/"+s.Key()+".csv"] = csvReference(t, design)
		for _, reg := range rr.Fit.Regions {
			for j, term := range d.Terms {
				psc := ""
				if term.Kind == fit.TermCondition || term.Kind == fit.TermFIR {
					psc = legacyNum(100 * reg.Beta[j] / reg.Baseline)
				}
				st := reg.Beta[j] / reg.StdError[j]
				est = append(est, []string{s.Subject, s.Session, s.Run, reg.Region, term.Name,
					legacyNum(reg.Beta[j]), legacyNum(reg.StdError[j]), legacyNum(st), strconv.Itoa(reg.DF),
					legacyNum(fit.TwoSidedP(st, float64(reg.DF))), psc})
			}
			join := func(vs []float64) string {
				c := make([]string, len(vs))
				for i, v := range vs {
					c[i] = legacyNum(v)
				}
				return strings.Join(c, " ")
			}
			diag = append(diag, []string{s.Subject, s.Session, s.Run, reg.Region, strconv.Itoa(rr.Plan.Volumes),
				strconv.Itoa(d.CensoredCount()), strconv.Itoa(reg.DF), legacyNum(reg.Sigma), legacyNum(reg.RSquared), reg.NoiseName,
				strconv.Itoa(len(reg.AR)), join(reg.AR), legacyNum(reg.DurbinWatson), legacyNum(reg.LjungBoxP), legacyNum(reg.NormalityP),
				legacyNum(reg.Baseline / reg.Sigma), join(reg.MA), legacyNum(reg.WhiteShare), reg.NoiseScope, strconv.Itoa(reg.NoisePasses)})
			for k := range reg.RawACF {
				acf = append(acf, []string{s.Subject, s.Session, s.Run, reg.Region, strconv.Itoa(k + 1),
					legacyNum(reg.RawACF[k]), legacyNum(reg.WhitenedACF[k])})
			}
		}
	}
	out["estimates.csv"] = csvReference(t, est)
	out["diagnostics.csv"] = csvReference(t, diag)
	out["autocorrelation.csv"] = csvReference(t, acf)
	return out
}

// TestWriteTablesMatchesEncodingCSV: the tables WriteTables writes for a
// fitted study (awkward region names; more regions than one part, so
// estimates and autocorrelation are formatted in several concurrent parts)
// are byte for byte those of the encoding/csv writers the tables used
// before.
func TestWriteTablesMatchesEncodingCSV(t *testing.T) {
	names := make([]string, partRegions+20)
	for i := range names {
		names[i] = fmt.Sprintf("r%03d", i)
	}
	copy(names, []string{"a,b", `quo"te`, `\.`, "x y", "é", "line\nbreak"})
	nm, err := fit.ParseNoise("auto")
	if err != nil {
		t.Fatal(err)
	}
	res := studyResult(t, simulate.Options{Subjects: 2, Runs: 2, Volumes: 120, TR: 2, Design: "event",
		WhiteShare: 0.5, Seed: 11, RegionNames: names},
		fit.Options{SliceRef: 0.5, Highpass: 128, HRF: fit.HRFDoubleGamma, Noise: nm})
	for _, rr := range res.Runs {
		if rr.Fit == nil {
			t.Fatal("a run was not fitted")
		}
		for _, reg := range rr.Fit.Regions {
			if reg.Skip != "" {
				t.Fatalf("region %s skipped: %s", reg.Region, reg.Skip)
			}
		}
	}
	dir := t.TempDir()
	out, err := NewOutput(dir)
	if err != nil {
		t.Fatal(err)
	}
	if err := WriteTables(out, res); err != nil {
		t.Fatal(err)
	}
	if err := out.Commit(); err != nil {
		t.Fatal(err)
	}
	for name, want := range legacyTables(t, res) {
		got, err := os.ReadFile(filepath.Join(dir, filepath.FromSlash(name)))
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(got, want) {
			t.Errorf("%s: %d bytes differ from the %d encoding/csv writes", name, len(got), len(want))
		}
	}
}

// BenchmarkWriteTables measures WriteTables on a fitted simulated study
// (8 runs of 400 regions), files included.
func BenchmarkWriteTables(b *testing.B) {
	nm, err := fit.ParseNoise("ar1")
	if err != nil {
		b.Fatal(err)
	}
	res := studyResult(b, simulate.Options{Subjects: 4, Runs: 2, Regions: 400, Volumes: 200, TR: 2,
		Design: "event", WhiteShare: 0.5, Seed: 1},
		fit.Options{SliceRef: 0.5, Highpass: 128, HRF: fit.HRFDoubleGamma, Noise: nm})
	dir := b.TempDir()
	b.ResetTimer()
	for b.Loop() {
		out, err := NewOutput(dir)
		if err != nil {
			b.Fatal(err)
		}
		if err := WriteTables(out, res); err != nil {
			b.Fatal(err)
		}
		out.Abort()
	}
}
