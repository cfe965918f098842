package report

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"

	"github.com/tessera-fmri/tessera/fit"
)

// qGroups says, per table, which columns form one Benjamini-Hochberg family
// and where its p and q values are; merge recomputes q over each family.
var qGroups = map[string]struct {
	keys []int
	p, q int
}{
	"contrasts.csv":         {[]int{0, 1, 2, 4}, 9, 10},
	"subject_contrasts.csv": {[]int{0, 2}, 8, 9},
	"ftests.csv":            {[]int{0, 1, 2, 4}, 8, 9},
}

// Merge joins the result folders of a sharded fit (fit --shard I/N for every
// I) into out: the same rows, in the same order and with the same bytes as
// one unsharded fit writes, with every quantity that spans shards recomputed
// (q values, relative efficiency). It refuses folders that are not the
// shards of one fit. report.md of the merged folder is a summary built from
// the tables.
func Merge(dirs []string, out *Output) error {
	provs := make([]*Provenance, len(dirs))
	for i, d := range dirs {
		p, err := readProvenance(filepath.Join(d, "provenance.json"))
		if err != nil {
			return err
		}
		if p.Shard == nil {
			return fmt.Errorf("%s: not the output of fit --shard (provenance.json has no shard)", d)
		}
		provs[i] = p
	}
	first := provs[0].Shard
	seen := map[int]string{}
	for i, p := range provs {
		s := p.Shard
		if s.Count != first.Count || !sameRuns(s.Runs, first.Runs) {
			return fmt.Errorf("%s and %s are shards of different fits (different study or shard count)", dirs[0], dirs[i])
		}
		if !sameOptions(p.Options, provs[0].Options) {
			return fmt.Errorf("%s and %s were fitted with different options", dirs[0], dirs[i])
		}
		if d, dup := seen[s.Index]; dup {
			return fmt.Errorf("%s and %s are both shard %d of %d", d, dirs[i], s.Index, s.Count)
		}
		seen[s.Index] = dirs[i]
	}
	var missing []string
	for i := 1; i <= first.Count; i++ {
		if _, ok := seen[i]; !ok {
			missing = append(missing, strconv.Itoa(i))
		}
	}
	if len(missing) > 0 {
		return fmt.Errorf("shards %s of %d are missing; merge needs every shard", strings.Join(missing, ", "), first.Count)
	}
	if err := checkShardsComplete(dirs, provs); err != nil {
		return err
	}
	runOrder := map[string]int{}
	for i, r := range first.Runs {
		runOrder[r.Subject+"\x00"+r.Session+"\x00"+r.Run] = i
	}
	subjOrder := map[string]int{}
	for i, s := range first.Subjects {
		subjOrder[s] = i
	}
	tables := map[string][][]string{}
	for _, def := range Tables {
		var head []string
		var rows [][]string
		present := false
		for _, d := range dirs {
			h, r, ok, err := readTable(filepath.Join(d, def.File))
			if err != nil {
				return err
			}
			if !ok {
				continue
			}
			if present && strings.Join(h, ",") != strings.Join(head, ",") {
				return fmt.Errorf("%s: header differs between shards", def.File)
			}
			head, present = h, true
			rows = append(rows, r...)
		}
		if !present {
			continue
		}
		order := func(r []string) int {
			if def.File == SubjectContrasts.File {
				return subjOrder[r[0]]
			}
			return runOrder[r[0]+"\x00"+r[1]+"\x00"+r[2]]
		}
		sort.SliceStable(rows, func(i, j int) bool { return order(rows[i]) < order(rows[j]) })
		if g, ok := qGroups[def.File]; ok {
			recomputeQ(rows, g.keys, g.p, g.q)
		}
		if def.File == AuditTable.File {
			recomputeRelativeEfficiency(rows)
		}
		tables[def.File] = rows
		f, err := out.Create(def.File)
		if err != nil {
			return err
		}
		w := newTableWriter(f, 0)
		w.record(head)
		for _, r := range rows {
			w.record(r)
		}
		if err := w.close(); err != nil {
			return err
		}
	}
	for _, d := range dirs {
		designs, _ := filepath.Glob(filepath.Join(d, "design", "*.csv"))
		for _, p := range designs {
			if err := copyInto(out, "design/"+filepath.Base(p), p); err != nil {
				return err
			}
		}
	}
	prov := &Provenance{Program: "tessera", Version: Version, Options: provs[0].Options, Merged: dirs, Timings: map[string]float64{}}
	prov.Options["shard"] = ""
	for _, p := range provs {
		prov.Inputs = append(prov.Inputs, p.Inputs...)
		prov.Warnings = append(prov.Warnings, p.Warnings...)
	}
	prov.Command = append([]string{"tessera", "merge"}, dirs...)
	if err := WriteProvenance(out, prov); err != nil {
		return err
	}
	f, err := out.Create("report.md")
	if err != nil {
		return err
	}
	_, err = io.WriteString(f, mergedMarkdown(dirs, tables, prov.Warnings))
	return err
}

func readProvenance(path string) (*Provenance, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("%s: %v; expected the provenance.json of a fit --shard folder", path, err)
	}
	var p Provenance
	if err := json.Unmarshal(b, &p); err != nil {
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	return &p, nil
}

func sameRuns(a, b []RunKey) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// sameOptions compares the model options of two shards, ignoring those
// that differ between shards by design.
func sameOptions(a, b map[string]string) bool {
	skip := map[string]bool{"shard": true, "output": true, "jobs": true, "overwrite": true, "quiet": true}
	for k, v := range a {
		if !skip[k] && b[k] != v {
			return false
		}
	}
	return len(a) == len(b)
}

// readTable reads a result table; ok is false when the file does not exist.
// alwaysWritten are the tables every fit writes; the others depend on the
// options (ftests, responses), which merge has checked are the same in
// every shard, or on the data (motion, for runs with motion columns).
var alwaysWritten = []TableDef{Estimates, Contrasts, SubjectContrasts, Diagnostics, AuditTable, Autocorrelation}

// checkShardsComplete refuses shard folders that do not hold what their
// fit wrote, so that a folder copied back from a cluster node in part
// cannot merge into tables that silently lack its subjects: every shard
// has the tables every fit writes, and the option-dependent ones where any
// shard has them; its diagnostics.csv has rows for exactly the runs of its
// subjects (subject i of the study, from 0, belongs to shard i mod N + 1),
// and design/ a table for each; every fitted region of diagnostics.csv has
// estimates and every region with estimates a diagnostics row.
func checkShardsComplete(dirs []string, provs []*Provenance) error {
	required := map[string]bool{}
	for _, t := range alwaysWritten {
		required[t.File] = true
	}
	for _, t := range []TableDef{FTests, Responses} {
		for _, d := range dirs {
			if _, err := os.Stat(filepath.Join(d, t.File)); err == nil {
				required[t.File] = true
			}
		}
	}
	for i, d := range dirs {
		for _, t := range Tables {
			if !required[t.File] {
				continue
			}
			if _, err := os.Stat(filepath.Join(d, t.File)); err != nil {
				return fmt.Errorf("%s lacks %s, which its fit writes: the shard's folder is incomplete (copied back in part?); fit the shard again or copy all of it", d, t.File)
			}
		}
		sh := provs[i].Shard
		subj := map[string]int{}
		for k, s := range sh.Subjects {
			subj[s] = k
		}
		want := map[string]bool{}
		for _, r := range sh.Runs {
			if subj[r.Subject]%sh.Count == sh.Index-1 {
				want[r.Subject+"\x00"+r.Session+"\x00"+r.Run] = true
				key := r.Subject + "_" + r.Run
				if r.Session != "" {
					key = r.Subject + "_" + r.Session + "_" + r.Run
				}
				if _, err := os.Stat(filepath.Join(d, "design", key+".csv")); err != nil {
					return fmt.Errorf("%s lacks design/%s.csv, which its fit writes: the shard's folder is incomplete; fit the shard again or copy all of it", d, key)
				}
			}
		}
		_, diag, _, err := readTable(filepath.Join(d, Diagnostics.File))
		if err != nil {
			return err
		}
		_, est, _, err := readTable(filepath.Join(d, Estimates.File))
		if err != nil {
			return err
		}
		got := map[string]bool{}
		fitted := map[string]bool{}
		for _, r := range diag {
			if len(r) < 10 {
				return fmt.Errorf("%s/%s: a row of %d cells; expected the table's columns", d, Diagnostics.File, len(r))
			}
			run := r[0] + "\x00" + r[1] + "\x00" + r[2]
			if !want[run] {
				return fmt.Errorf("%s/%s has rows of subject %q, run %q, which is not a run of shard %d of %d", d, Diagnostics.File, r[0], r[2], sh.Index, sh.Count)
			}
			got[run] = true
			if !strings.HasPrefix(r[9], "skipped:") {
				fitted[run+"\x00"+r[3]] = true
			}
		}
		for run := range want {
			if !got[run] {
				parts := strings.Split(run, "\x00")
				return fmt.Errorf("%s/%s has no rows of subject %q, run %q, a run of this shard: the shard's folder is incomplete", d, Diagnostics.File, parts[0], parts[2])
			}
		}
		withEst := map[string]bool{}
		for _, r := range est {
			if len(r) < 4 {
				return fmt.Errorf("%s/%s: a row of %d cells; expected the table's columns", d, Estimates.File, len(r))
			}
			withEst[r[0]+"\x00"+r[1]+"\x00"+r[2]+"\x00"+r[3]] = true
		}
		for k := range fitted {
			if !withEst[k] {
				parts := strings.Split(k, "\x00")
				return fmt.Errorf("%s/%s has no rows of subject %q, run %q, region %q, which diagnostics.csv lists as fitted: the shard's tables do not match", d, Estimates.File, parts[0], parts[2], parts[3])
			}
		}
		for k := range withEst {
			if !fitted[k] {
				parts := strings.Split(k, "\x00")
				return fmt.Errorf("%s/%s has no fitted row of subject %q, run %q, region %q, which estimates.csv holds: the shard's tables do not match", d, Diagnostics.File, parts[0], parts[2], parts[3])
			}
		}
	}
	return nil
}

func readTable(path string) (head []string, rows [][]string, ok bool, err error) {
	f, err := os.Open(path)
	if os.IsNotExist(err) {
		return nil, nil, false, nil
	}
	if err != nil {
		return nil, nil, false, err
	}
	defer f.Close()
	all, err := csv.NewReader(f).ReadAll()
	if err != nil {
		return nil, nil, false, fmt.Errorf("%s: %v; expected a complete table as fit writes it (is the copy truncated?)", path, err)
	}
	if len(all) == 0 {
		return nil, nil, false, fmt.Errorf("%s: empty; expected a header", path)
	}
	return all[0], all[1:], true, nil
}

// recomputeQ sets column q of every row to the Benjamini-Hochberg q value
// of column p within the rows that share the key columns, in row order.
func recomputeQ(rows [][]string, keys []int, p, q int) {
	groups := map[string][]int{}
	var order []string
	for i, r := range rows {
		var k strings.Builder
		for _, c := range keys {
			k.WriteString(r[c])
			k.WriteByte(0)
		}
		if _, ok := groups[k.String()]; !ok {
			order = append(order, k.String())
		}
		groups[k.String()] = append(groups[k.String()], i)
	}
	for _, k := range order {
		idx := groups[k]
		pv := make([]float64, len(idx))
		for j, i := range idx {
			pv[j] = parseCell(rows[i][p])
		}
		qv := fit.BenjaminiHochberg(pv)
		for j, i := range idx {
			rows[i][q] = Num(qv[j])
		}
	}
}

// recomputeRelativeEfficiency sets every relative_efficiency row of the
// audit to the run's efficiency over the best efficiency of that contrast
// in any run of the study, as fit.Plan computes it.
func recomputeRelativeEfficiency(rows [][]string) {
	best := map[string]float64{}
	eff := map[string]float64{}
	for _, r := range rows {
		if r[4] == "efficiency" {
			v := parseCell(r[5])
			best[r[3]] = math.Max(best[r[3]], v)
			eff[r[0]+"\x00"+r[1]+"\x00"+r[2]+"\x00"+r[3]] = v
		}
	}
	for _, r := range rows {
		if r[4] == "relative_efficiency" {
			r[5] = Num(eff[r[0]+"\x00"+r[1]+"\x00"+r[2]+"\x00"+r[3]] / best[r[3]])
		}
	}
}

func parseCell(s string) float64 {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		return math.NaN()
	}
	return v
}

func copyInto(out *Output, rel, src string) error {
	in, err := os.Open(src)
	if err != nil {
		return err
	}
	defer in.Close()
	f, err := out.Create(rel)
	if err != nil {
		return err
	}
	_, err = io.Copy(f, in)
	return err
}

// mergedMarkdown is the report of a merged folder, built from its tables.
func mergedMarkdown(dirs []string, tables map[string][][]string, warnings []string) string {
	var b strings.Builder
	p := func(format string, a ...any) { fmt.Fprintf(&b, format, a...) }
	p("# Tessera region GLM report (merged shards)\n\n")
	p("> **Caution.** %s\n\n", Caution)
	p("Merged from %d shard folders: %s. The tables are exactly those of one unsharded fit; this report is a summary built from them (each shard folder keeps its own full report of its subjects).\n\n", len(dirs), "`"+strings.Join(dirs, "`, `")+"`")
	sub := tables[SubjectContrasts.File]
	byContrast := map[string][][]string{}
	var contrasts []string
	for _, r := range sub {
		if _, ok := byContrast[r[2]]; !ok {
			contrasts = append(contrasts, r[2])
		}
		byContrast[r[2]] = append(byContrast[r[2]], r)
	}
	p("## Results\n\nSubject level (runs combined by fixed effects), regions ranked by |t|, the strongest %d rows; every row is in `subject_contrasts.csv`.\n\n", topRows)
	for _, c := range contrasts {
		rows := byContrast[c]
		sort.SliceStable(rows, func(i, j int) bool { return math.Abs(parseCell(rows[i][6])) > math.Abs(parseCell(rows[j][6])) })
		p("### Contrast `%s`\n\n| subject | region | runs | psc (%%) | t | df | q |\n| --- | --- | --- | --- | --- | --- | --- |\n", c)
		for i, r := range rows {
			if i == topRows {
				break
			}
			p("| %s | %s | %s | %.3f | %.2f | %s | %s |\n", r[0], r[1], r[3], parseCell(r[10]), parseCell(r[6]), r[7], FormatQ(parseCell(r[9])))
		}
		p("\n")
	}
	auto, nonNormal, fitted := 0, 0, 0
	for _, r := range tables[Diagnostics.File] {
		if strings.HasPrefix(r[9], "skipped") {
			continue
		}
		fitted++
		if parseCell(r[13]) < FlagLjungBox {
			auto++
		}
		if parseCell(r[14]) < FlagNormality {
			nonNormal++
		}
	}
	p("## Diagnostics\n\n%d region fits; whitened residuals still autocorrelated (Ljung-Box p < %g): %d; clearly non-normal (Jarque-Bera p < %g): %d. Each shard's report lists them.\n\n", fitted, FlagLjungBox, auto, FlagNormality, nonNormal)
	if len(warnings) > 0 {
		p("## Warnings\n\n")
		for _, w := range warnings {
			p("- %s\n", w)
		}
		p("\n")
	}
	p("## Cautions\n\n- %s\n", Caution)
	return b.String()
}
