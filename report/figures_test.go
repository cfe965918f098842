package report

import (
	"bytes"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"

	"github.com/tessera-fmri/tessera/fit"
	"github.com/tessera-fmri/tessera/simulate"
)

// Blankness thresholds of the figure test. A drawn figure has axes, text
// and data in several colours; a blank or nearly blank one has the
// background and perhaps antialiased edges of one frame.
const (
	// minColours: more than the background and one ink colour.
	minColours = 3
	// minInked is the least share of pixels that differ from the
	// background: an empty 800×500 frame with a title and axes covers
	// 1.2%, the line and bar figures of the test studies 4.3% or more.
	minInked = 0.03
	// minInkedSparse is for the group figure with few labels, which is
	// mostly white by design; it still needs data beyond an empty frame.
	minInkedSparse = 0.015
	// minInkedDesign: the design matrix image fills most of its canvas.
	minInkedDesign = 0.4
)

// studyResult fits a small simulated study (motion included, so framewise
// displacement exists) with the given model options.
func studyResult(t testing.TB, so simulate.Options, o fit.Options) *fit.StudyResult {
	t.Helper()
	st, err := simulate.Generate(so)
	if err != nil {
		t.Fatal(err)
	}
	plans, err := fit.Plan(st.Inputs(), o)
	if err != nil {
		t.Fatal(err)
	}
	res, err := fit.FitStudy(plans, o)
	if err != nil {
		t.Fatal(err)
	}
	return res
}

// checkPNG decodes a PNG and checks its size and that it is not blank.
func checkPNG(path string, w, h int, inked float64) error {
	f, err := os.Open(path)
	if err != nil {
		return err
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		return fmt.Errorf("%s: %v", path, err)
	}
	return checkImage(img, w, h, inked)
}

// checkImage checks the size of img and that it is not blank: at least
// minColours distinct colours and a share of at least inked pixels that
// differ from the background (the colour of the top-left pixel).
func checkImage(img image.Image, w, h int, inked float64) error {
	b := img.Bounds()
	if b.Dx() != w || b.Dy() != h {
		return fmt.Errorf("size %d×%d, want %d×%d", b.Dx(), b.Dy(), w, h)
	}
	bg := color.RGBAModel.Convert(img.At(b.Min.X, b.Min.Y))
	colours := map[color.Color]bool{}
	ink := 0
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			c := color.RGBAModel.Convert(img.At(x, y))
			colours[c] = true
			if c != bg {
				ink++
			}
		}
	}
	if len(colours) < minColours {
		return fmt.Errorf("%d distinct colours; want at least %d", len(colours), minColours)
	}
	if share := float64(ink) / float64(w*h); share < inked {
		return fmt.Errorf("%.2f%% of pixels differ from the background; want at least %.1f%%", 100*share, 100*inked)
	}
	return nil
}

var imageLink = regexp.MustCompile(`!\[([^\]]*)\]\(([^)]+)\)`)

func TestFigures(t *testing.T) {
	ar1, _ := fit.ParseNoise("ar1")
	ols, _ := fit.ParseNoise("ols")
	cases := []struct {
		name string
		sim  simulate.Options
		opt  fit.Options
		// want is the number of figures of each kind (file name prefix).
		want map[string]int
	}{
		{
			name: "double-gamma, AR(1), censoring",
			sim:  simulate.Options{Subjects: 2, Runs: 2, Regions: 6, Volumes: 120, Seed: 3},
			opt:  fit.Options{HRF: fit.HRFDoubleGamma, SliceRef: 0.5, Highpass: 128, Noise: ar1, CensorFD: 0.2, Jobs: 1},
			// 4 runs; 2 contrasts × 3 results; the 3 strongest distinct
			// pairs; FD of every run.
			want: map[string]int{"design_": 4, "timecourse_": 6, "autocorrelation_": 3, "displacement_": 4},
		},
		{
			name: "FIR, OLS, one run",
			sim:  simulate.Options{Subjects: 1, Runs: 1, Regions: 5, Volumes: 150, Seed: 4, Design: "event"},
			opt:  fit.Options{HRF: fit.HRFFIR, FIRWindow: 16, FIRBins: 8, SliceRef: 0.5, Highpass: 128, Noise: ols, Jobs: 1},
			want: map[string]int{"design_": 1, "timecourse_": 6, "autocorrelation_": 3, "displacement_": 1, "fir_": 2},
		},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			res := studyResult(t, c.sim, c.opt)
			dir := t.TempDir()
			out, err := NewOutput(dir)
			if err != nil {
				t.Fatal(err)
			}
			figs, err := WriteFigures(out, res)
			if err != nil {
				t.Fatal(err)
			}
			if err := out.Commit(); err != nil {
				t.Fatal(err)
			}
			got := map[string]int{}
			for _, f := range figs {
				if !strings.HasPrefix(f.Path, "figures/") || !strings.HasSuffix(f.Path, ".png") {
					t.Errorf("figure path %q: want figures/NAME.png", f.Path)
				}
				if f.Caption == "" || strings.Contains(f.Caption, "\n") {
					t.Errorf("%s: caption %q is not one line", f.Path, f.Caption)
				}
				name := strings.TrimPrefix(f.Path, "figures/")
				kind := name[:strings.Index(name, "_")+1]
				got[kind]++
				h, inked := figureHeight, minInked
				if kind == "design_" {
					h, inked = designFigureHeight, minInkedDesign
				}
				if err := checkPNG(filepath.Join(dir, filepath.FromSlash(f.Path)), figureWidth, h, inked); err != nil {
					t.Errorf("%s: %v", f.Path, err)
				}
			}
			for kind, n := range c.want {
				if got[kind] != n {
					t.Errorf("%d %s figures; want %d (all: %v)", got[kind], kind, n, got)
				}
			}
			for kind := range got {
				if c.want[kind] == 0 {
					t.Errorf("unexpected %s figures (%d)", kind, got[kind])
				}
			}
			if c.opt.CensorFD > 0 {
				censored := 0
				for _, r := range res.Runs {
					censored += r.Plan.Design.CensoredCount()
				}
				if censored == 0 {
					t.Errorf("no volume censored at --censor-fd %g: the displacement figures mark nothing", c.opt.CensorFD)
				}
			}

			// Every image link of the report resolves, each figure is
			// linked once, and its caption follows the image.
			md := Markdown(res, ReportInfo{Study: "study.csv", Command: "tessera fit", Figures: figs})
			links := imageLink.FindAllStringSubmatch(md, -1)
			if len(links) != len(figs) {
				t.Fatalf("report has %d image links; want %d", len(links), len(figs))
			}
			for i, l := range links {
				if l[2] != figs[i].Path {
					t.Errorf("link %d is %q; want %q", i, l[2], figs[i].Path)
				}
				if _, err := os.Stat(filepath.Join(dir, filepath.FromSlash(l[2]))); err != nil {
					t.Errorf("report links %s: %v", l[2], err)
				}
				if !strings.Contains(md, l[0]+"\n\n"+figs[i].Caption+"\n") {
					t.Errorf("%s: caption does not follow the image", l[2])
				}
			}
			if !strings.Contains(md, "\n## Figures\n") {
				t.Error("report has no Figures section")
			}
			for _, h := range []string{"Design matrices", "Observed and fitted time courses", "Residual autocorrelation", "Framewise displacement"} {
				if !strings.Contains(md, "\n### "+h+"\n") {
					t.Errorf("report has no %q subheading", h)
				}
			}
		})
	}
}

// TestFigureRunCap: a study with more runs than FigureRuns draws design
// matrices for the first FigureRuns only, and the report says so.
func TestFigureRunCap(t *testing.T) {
	ols, _ := fit.ParseNoise("ols")
	res := studyResult(t, simulate.Options{Subjects: 7, Runs: 2, Regions: 3, Volumes: 60, Seed: 5},
		fit.Options{HRF: fit.HRFDoubleGamma, Highpass: 128, Noise: ols, Jobs: 1})
	out, err := NewOutput(t.TempDir())
	if err != nil {
		t.Fatal(err)
	}
	figs, err := WriteFigures(out, res)
	if err != nil {
		t.Fatal(err)
	}
	out.Abort()
	designs := 0
	for _, f := range figs {
		if strings.HasPrefix(f.Path, "figures/design_") {
			designs++
		}
	}
	if designs != FigureRuns {
		t.Errorf("%d design figures for %d runs; want %d", designs, len(res.Runs), FigureRuns)
	}
	md := Markdown(res, ReportInfo{Figures: figs})
	if want := fmt.Sprintf("first %d of the %d runs", FigureRuns, len(res.Runs)); !strings.Contains(md, want) {
		t.Errorf("report does not say %q", want)
	}
}

func TestGroupEffectsFigure(t *testing.T) {
	for _, n := range []int{4, 60} {
		labels := make([]string, n)
		est, lo, hi := make([]float64, n), make([]float64, n), make([]float64, n)
		for i := range labels {
			labels[i] = fmt.Sprintf("region_%02d", i+1)
			est[i] = float64(i%7) - 2
			lo[i], hi[i] = est[i]-0.8, est[i]+0.8
		}
		dir := t.TempDir()
		out, err := NewOutput(dir)
		if err != nil {
			t.Fatal(err)
		}
		f, err := GroupEffectsFigure(out, "group effects/order", labels, est, lo, hi, "Group effect per region with its 95% interval.")
		if err != nil {
			t.Fatal(err)
		}
		if err := out.Commit(); err != nil {
			t.Fatal(err)
		}
		if f.Path != "figures/group-effects-order.png" {
			t.Errorf("path %q", f.Path)
		}
		h := max(figureHeight, 80+groupRowPixels*n)
		path := filepath.Join(dir, "figures", "group-effects-order.png")
		if err := checkPNG(path, figureWidth, h, minInkedSparse); err != nil {
			t.Errorf("%d labels: %v", n, err)
		}
		// The intervals are drawn: teal pixels, at least a few per label.
		if got := countColour(t, path, colTeal); got < 20*n {
			t.Errorf("%d labels: %d pixels in the interval colour; want at least %d", n, got, 20*n)
		}
	}
}

// countColour counts the pixels of a PNG that are exactly c.
func countColour(t *testing.T, path string, c color.RGBA) int {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			if color.RGBAModel.Convert(img.At(x, y)) == c {
				n++
			}
		}
	}
	return n
}

// TestBlankCheck: the blankness check rejects a blank canvas, a canvas
// with one thin line, and a wrong size, so the figure tests can fail.
func TestBlankCheck(t *testing.T) {
	blank := image.NewRGBA(image.Rect(0, 0, figureWidth, figureHeight))
	for i := range blank.Pix {
		blank.Pix[i] = 0xFF
	}
	if checkImage(blank, figureWidth, figureHeight, minInked) == nil {
		t.Error("a blank image passes")
	}
	line := image.NewRGBA(blank.Bounds())
	copy(line.Pix, blank.Pix)
	for x := 0; x < figureWidth; x++ {
		line.Set(x, 250, colInk)
		line.Set(x, 251, colObserved)
	}
	if checkImage(line, figureWidth, figureHeight, minInked) == nil {
		t.Error("an image with one thin line passes")
	}
	if checkImage(blank, figureWidth, figureHeight+1, 0) == nil {
		t.Error("a wrong size passes")
	}
}

// TestStaleFigures: an --overwrite fit removes figures the new fit did not
// draw, and ExistingResults notices figures.
func TestStaleFigures(t *testing.T) {
	dir := t.TempDir()
	for _, names := range [][]string{{"a", "b"}, {"a"}} {
		out, err := NewOutput(dir)
		if err != nil {
			t.Fatal(err)
		}
		for _, n := range names {
			f, err := out.Create("figures/" + n + ".png")
			if err != nil {
				t.Fatal(err)
			}
			f.WriteString("png")
		}
		if err := out.CommitReplacing(); err != nil {
			t.Fatal(err)
		}
	}
	if _, err := os.Stat(filepath.Join(dir, "figures", "b.png")); !os.IsNotExist(err) {
		t.Errorf("stale figures/b.png was not removed (%v)", err)
	}
	if _, err := os.Stat(filepath.Join(dir, "figures", "a.png")); err != nil {
		t.Errorf("figures/a.png: %v", err)
	}
	found := ExistingResults(dir)
	if !strings.Contains(strings.Join(found, " "), "figures/") {
		t.Errorf("ExistingResults = %v; want figures/ listed", found)
	}
}

// TestCanvasMatchesNewWith: a figure drawn by render (a pooled image that
// held another drawing, the canvas set up by newCanvas, pooled PNG
// buffers) is byte for byte the PNG that a fresh vgimg.NewWith canvas
// gives, for every kind of figure of a fitted study.
func TestCanvasMatchesNewWith(t *testing.T) {
	ar1, _ := fit.ParseNoise("ar1")
	res := studyResult(t, simulate.Options{Subjects: 1, Runs: 2, Regions: 4, Volumes: 100, Seed: 5},
		fit.Options{HRF: fit.HRFDoubleGamma, SliceRef: 0.5, Highpass: 128, Noise: ar1, CensorFD: 0.2, Jobs: 1})
	fw := &figureWriter{out: nil, used: map[string]bool{}}
	for _, r := range res.Runs {
		fw.design(r)
		fw.displacement(r, res.Options.CensorFD)
	}
	for _, pk := range strongest(res) {
		fw.timeCourse(pk)
		fw.autocorrelation(pk)
	}
	if fw.err != nil {
		t.Fatal(fw.err)
	}
	if len(fw.jobs) < 6 {
		t.Fatalf("%d figures, want design, displacement, time course and autocorrelation figures", len(fw.jobs))
	}
	for i := range fw.jobs {
		j := &fw.jobs[i]
		// Leave a used image of this size in the pool, filled with ink.
		dirty := canvases.get(j.w, j.h)
		for k := range dirty.Pix {
			dirty.Pix[k] = byte(k)
		}
		canvases.put(dirty)
		j.render()
		c := vgimg.NewWith(vgimg.UseWH(vg.Length(j.w)*vg.Inch/figureDPI, vg.Length(j.h)*vg.Inch/figureDPI), vgimg.UseDPI(figureDPI))
		j.plot.Draw(draw.New(c))
		var want bytes.Buffer
		if err := (&png.Encoder{CompressionLevel: png.BestSpeed}).Encode(&want, c.Image()); err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(j.png.Bytes(), want.Bytes()) {
			t.Errorf("%s: the rendered PNG (%d bytes) differs from vgimg.NewWith's (%d bytes)", j.fig.Path, j.png.Len(), want.Len())
		}
	}
}
