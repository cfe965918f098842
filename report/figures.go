package report

import (
	"bytes"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"math"
	"runtime"
	"sort"
	"strings"
	"sync"

	"git.sr.ht/~sbinet/gg"
	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"

	"github.com/tessera-fmri/tessera/fit"
)

// Figure is one image of the report.
type Figure struct {
	Path    string // relative to the output folder, slash-separated: figures/NAME.png
	Caption string // one line saying what to look for
}

// Figure counts are capped so that a large study still writes its report
// in seconds; the report says when a cap applied.
const (
	// FigureRuns is how many runs (the first ones) get a design matrix and
	// a framewise displacement figure.
	FigureRuns = 12
	// figureTop is how many subject-level results of each contrast get a
	// time course figure, strongest |t| first.
	figureTop = 3
	// figureContrasts caps the contrasts that get time course figures.
	figureContrasts = 6
	// figureACF caps the residual autocorrelation figures (the strongest
	// distinct run and region pairs).
	figureACF = 3
	// acfLags are the lags 1..acfLags of the autocorrelation figures.
	acfLags = 10
	// figureConditions caps the FIR response figures.
	figureConditions = 6
	// firTop is how many regions an FIR figure shows beside the mean.
	firTop = 3
)

// Figure sizes in pixels; the canvas is drawn at figureDPI, so a length of
// px·72/figureDPI points is px pixels.
const (
	figureDPI           = 96
	figureWidth         = 800
	figureHeight        = 500
	designFigureHeight  = 800
	groupRowPixels      = 18 // height per label of a group effects figure
	groupFigureMaxPixel = 2400
)

// The report's palette, the project's own: an ink blue-grey for text,
// axes and means; a warm orange for fitted values; a deep teal for what a
// model leaves after whitening; mustard for raw residuals; a crimson for
// marked (censored) volumes; a cool grey for observed data; a sand tone for
// guides. The design matrix ramp runs from paper white through teal to ink.
var (
	colInk      = color.RGBA{0x22, 0x31, 0x3F, 0xFF} // #22313F
	colFitted   = color.RGBA{0xC2, 0x57, 0x1A, 0xFF} // #C2571A
	colTeal     = color.RGBA{0x1F, 0x7A, 0x72, 0xFF} // #1F7A72
	colMustard  = color.RGBA{0xD9, 0xA4, 0x41, 0xFF} // #D9A441
	colCrimson  = color.RGBA{0xB3, 0x26, 0x3E, 0xFF} // #B3263E
	colObserved = color.RGBA{0x8A, 0x9B, 0xA8, 0xFF} // #8A9BA8
	colGuide    = color.RGBA{0xB8, 0xAE, 0x98, 0xFF} // #B8AE98
	colPaper    = color.RGBA{0xFB, 0xF8, 0xF1, 0xFF} // #FBF8F1
	// regionColours tell the regions of one figure apart.
	regionColours = []color.Color{colTeal, colFitted, colCrimson}
)

// WriteFigures draws the report's figures into out (figures/*.png) and
// returns them in the order the report shows them: the design matrix of
// each of the first FigureRuns runs; the observed and fitted time course of
// the figureTop strongest subject-level results of each contrast; the
// residual autocorrelation before and after whitening of the strongest
// regions; framewise displacement with censored volumes marked (runs with
// motion columns, first FigureRuns runs); and, with --hrf fir, the response
// curve of each condition.
func WriteFigures(out *Output, res *fit.StudyResult) ([]Figure, error) {
	w := &figureWriter{out: out, used: map[string]bool{}}
	runs := res.Runs
	if len(runs) > FigureRuns {
		runs = runs[:FigureRuns]
	}
	for _, r := range runs {
		w.design(r)
	}
	picks := strongest(res)
	for _, pk := range picks {
		w.timeCourse(pk)
	}
	seen := map[string]bool{}
	n := 0
	for _, pk := range byRank(picks) {
		id := pk.run.Plan.Run.Spec.Key() + "\x00" + pk.region.Region
		if seen[id] || n == figureACF {
			continue
		}
		seen[id] = true
		n++
		w.autocorrelation(pk)
	}
	for _, r := range runs {
		if r.Plan.FD != nil {
			w.displacement(r, res.Options.CensorFD)
		}
	}
	if res.Options.HRF == fit.HRFFIR {
		conds := fit.Conditions(planList(res))
		if len(conds) > figureConditions {
			conds = conds[:figureConditions]
		}
		for _, c := range conds {
			w.fir(res, c)
		}
	}
	return w.finish()
}

// GroupEffectsFigure draws one estimate per label with its interval
// [lo, hi] (a forest plot: labels down the side, zero marked) into
// figures/NAME.png, for the group command to embed in its report.
func GroupEffectsFigure(out *Output, name string, labels []string, est, lo, hi []float64, caption string) (Figure, error) {
	if len(est) != len(labels) || len(lo) != len(labels) || len(hi) != len(labels) {
		panic("report: group effects figure needs one estimate and interval per label")
	}
	w := &figureWriter{out: out, used: map[string]bool{}}
	p := newPlot("", "estimate with its interval", "")
	n := len(labels)
	pts := make(plotter.XYs, 0, n)
	for i := range labels {
		y := float64(n - 1 - i) // first label at the top
		if !finite(est[i]) {
			continue
		}
		pts = append(pts, plotter.XY{X: est[i], Y: y})
		if finite(lo[i]) && finite(hi[i]) {
			addLine(p, plotter.XYs{{X: lo[i], Y: y}, {X: hi[i], Y: y}}, colTeal, 2, false)
		}
	}
	if len(pts) > 0 {
		sc, _ := plotter.NewScatter(pts)
		sc.GlyphStyle = draw.GlyphStyle{Color: colInk, Radius: vg.Points(3), Shape: draw.CircleGlyph{}}
		p.Add(sc)
	}
	p.Y.Min, p.Y.Max = -0.7, float64(n)-0.3
	xmin, xmax := 0.0, 0.0
	for i := range labels {
		for _, v := range []float64{est[i], lo[i], hi[i]} {
			if finite(v) {
				xmin, xmax = math.Min(xmin, v), math.Max(xmax, v)
			}
		}
	}
	addLine(p, plotter.XYs{{X: 0, Y: p.Y.Min}, {X: 0, Y: p.Y.Max}}, colGuide, 1, true)
	pad := 0.05 * math.Max(xmax-xmin, 1e-9)
	p.X.Min, p.X.Max = xmin-pad, xmax+pad
	ticks := make([]plot.Tick, n)
	for i, l := range labels {
		ticks[i] = plot.Tick{Value: float64(n - 1 - i), Label: l}
	}
	p.Y.Tick.Marker = plot.ConstantTicks(ticks)
	h := min(max(figureHeight, 80+groupRowPixels*n), groupFigureMaxPixel)
	if n > (groupFigureMaxPixel-80)/groupRowPixels {
		p.Y.Tick.Label.Font.Size = vg.Points(6)
	}
	w.save(fileSafe(name), caption, p, figureWidth, h)
	figs, err := w.finish()
	if err != nil {
		return Figure{}, err
	}
	return figs[0], nil
}

// writeFigureSection renders the report's Figures section: each figure as
// an image link with its caption beneath.
func writeFigureSection(p func(string, ...any), res *fit.StudyResult, figs []Figure) {
	if len(figs) == 0 {
		return
	}
	p("## Figures\n\n")
	if len(res.Runs) > FigureRuns {
		p("Design matrices and framewise displacement are shown for the first %d of the %d runs.\n\n", FigureRuns, len(res.Runs))
	}
	heading := ""
	for _, f := range figs {
		if h := figureHeading(f.Path); h != heading && h != "" {
			heading = h
			p("### %s\n\n", h)
		}
		alt := strings.NewReplacer("[", "(", "]", ")", "\n", " ").Replace(f.Caption)
		p("![%s](%s)\n\n%s\n\n", alt, f.Path, f.Caption)
	}
}

// figureHeading names the kind of figure a WriteFigures path holds, for
// the report's subheadings; "" for others.
func figureHeading(path string) string {
	kinds := []struct{ prefix, heading string }{
		{"figures/design_", "Design matrices"},
		{"figures/timecourse_", "Observed and fitted time courses"},
		{"figures/autocorrelation_", "Residual autocorrelation"},
		{"figures/displacement_", "Framewise displacement"},
		{"figures/fir_", "FIR responses"},
	}
	for _, k := range kinds {
		if strings.HasPrefix(path, k.prefix) {
			return k.heading
		}
	}
	return ""
}

// figureWriter collects the figures to draw; finish draws them.
type figureWriter struct {
	out  *Output
	jobs []figureJob
	used map[string]bool
	err  error
}

// figureJob is one figure waiting to be drawn.
type figureJob struct {
	fig  Figure
	plot *plot.Plot
	w, h int
	png  bytes.Buffer
}

// maxFigureName is the longest figure file name kept, before ".png" and a
// suffix that makes it unique (names are ASCII after fileSafe).
const maxFigureName = 120

// save queues p for drawing at w×h pixels into figures/NAME.png (NAME cut
// to maxFigureName bytes and made unique).
func (fw *figureWriter) save(name, caption string, p *plot.Plot, w, h int) {
	if len(name) > maxFigureName {
		// Long region or condition names would exceed the file system's
		// limit on a name (255 bytes); the caption keeps the full name.
		name = name[:maxFigureName]
	}
	base := name
	for i := 2; fw.used[name]; i++ {
		name = fmt.Sprintf("%s-%d", base, i)
	}
	fw.used[name] = true
	fw.jobs = append(fw.jobs, figureJob{fig: Figure{Path: "figures/" + name + ".png", Caption: caption}, plot: p, w: w, h: h})
}

// finish draws and encodes the queued figures in parallel (each plot is
// its own; fonts are shared through gonum/plot's locked cache), then
// writes them into out in queue order.
func (fw *figureWriter) finish() ([]Figure, error) {
	if fw.err != nil {
		return nil, fw.err
	}
	next := make(chan int)
	var wg sync.WaitGroup
	for range min(runtime.GOMAXPROCS(0), len(fw.jobs)) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range next {
				fw.jobs[i].render()
			}
		}()
	}
	for i := range fw.jobs {
		next <- i
	}
	close(next)
	wg.Wait()
	figs := make([]Figure, 0, len(fw.jobs))
	for i := range fw.jobs {
		j := &fw.jobs[i]
		f, err := fw.out.Create(j.fig.Path)
		if err != nil {
			return nil, err
		}
		if _, err := f.Write(j.png.Bytes()); err != nil {
			return nil, err
		}
		j.png = bytes.Buffer{}
		figs = append(figs, j.fig)
	}
	return figs, nil
}

// render draws the plot and encodes it as PNG.
func (j *figureJob) render() {
	img := canvases.get(j.w, j.h)
	defer canvases.put(img)
	j.plot.Draw(draw.New(newCanvas(img)))
	// Fastest compression: encoding is most of a figure's cost, and the
	// flat-colour figures stay small.
	enc := png.Encoder{CompressionLevel: png.BestSpeed, BufferPool: &pngBuffers}
	if err := enc.Encode(&j.png, img); err != nil {
		panic("report: PNG encoding into memory failed: " + err.Error()) // only an invalid image can fail
	}
}

// newCanvas returns a canvas at figureDPI that draws into img, set up as
// vgimg.NewWith(vgimg.UseWH(...), vgimg.UseDPI(figureDPI)) sets up the
// image it makes (a context with butt line caps and the y axis inverted,
// the whole image filled with the white background), so the pixels are
// the same; NewWith would allocate two images and copy one into the other.
func newCanvas(img *image.RGBA) *vgimg.Canvas {
	ctx := gg.NewContextForRGBA(img)
	ctx.SetLineCapButt()
	ctx.InvertY()
	return vgimg.NewWith(vgimg.UseImageWithContext(img, ctx), vgimg.UseDPI(figureDPI))
}

// imagePool keeps the images figures were drawn into, one sync.Pool per
// size, for the next figures: fresh images of one or two megabytes each
// cost more in page faults than drawing into them. A canvas fills its
// whole image with the background first, so nothing of the previous figure
// remains; the garbage collector empties the pools when they sit unused.
type imagePool struct {
	sizes sync.Map // image.Point → *sync.Pool of *image.RGBA
}

// canvases is the pool of figure images.
var canvases imagePool

// get returns a w×h image, reused when one is free.
func (p *imagePool) get(w, h int) *image.RGBA {
	size := image.Pt(w, h)
	if pool, ok := p.sizes.Load(size); ok {
		if img, ok := pool.(*sync.Pool).Get().(*image.RGBA); ok {
			return img
		}
	}
	return image.NewRGBA(image.Rectangle{Max: size})
}

// put returns img to the pool of its size.
func (p *imagePool) put(img *image.RGBA) {
	pool, _ := p.sizes.LoadOrStore(img.Rect.Size(), &sync.Pool{})
	pool.(*sync.Pool).Put(img)
}

// pngPool lets the PNG encoder reuse its buffers and compressor from one
// figure to the next (image/png resets them; the bytes are the same).
type pngPool struct{ pool sync.Pool }

// pngBuffers is the PNG encoder's buffer pool.
var pngBuffers pngPool

// Get returns a free encoder buffer, or nil for the encoder to make one.
func (p *pngPool) Get() *png.EncoderBuffer {
	b, _ := p.pool.Get().(*png.EncoderBuffer)
	return b
}

// Put keeps b for a later figure.
func (p *pngPool) Put(b *png.EncoderBuffer) { p.pool.Put(b) }

// design draws a run's design matrix: one column per term, volumes
// downwards, each column scaled from its minimum (paper) to its maximum
// (ink), so that columns of very different ranges are all visible.
func (fw *figureWriter) design(r *fit.RunResult) {
	d := r.Plan.Design
	n, k := d.X.Dims()
	if n == 0 || k == 0 {
		return
	}
	key := r.Plan.Run.Spec.Key()
	p := newPlot(fmt.Sprintf("Design matrix, run %s (%d volumes × %d terms)", key, n, k), "", "volume")
	// Volume t is drawn from the top: data y = n - t.
	p.Add(designCells{d.X})
	p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = 0, float64(k), 0, float64(n)
	step := max(1, int(math.Ceil(float64(k)/60)))
	var ticks []plot.Tick
	for j, t := range d.Terms {
		label := ""
		if j%step == 0 {
			label = t.Name
		}
		ticks = append(ticks, plot.Tick{Value: float64(j) + 0.5, Label: label})
	}
	p.X.Tick.Marker = plot.ConstantTicks(ticks)
	p.X.Tick.Label.Rotation = math.Pi / 2
	p.X.Tick.Label.XAlign = draw.XRight
	p.X.Tick.Label.YAlign = draw.YCenter
	if k > 30 {
		p.X.Tick.Label.Font.Size = vg.Points(7)
	} else {
		p.X.Tick.Label.Font.Size = vg.Points(9)
	}
	p.Y.Tick.Marker = plot.TickerFunc(func(lo, hi float64) []plot.Tick {
		ts := plot.DefaultTicks{}.Ticks(float64(n)-hi, float64(n)-lo)
		for i := range ts {
			ts[i].Value = float64(n) - ts[i].Value
		}
		return ts
	})
	p.X.Padding, p.Y.Padding = 0, 0
	fw.save("design_"+fileSafe(key), fmt.Sprintf("Design matrix of run %s, each column scaled to its own range (light = low, dark = high): condition columns should follow the task, and no two columns should look alike.", key), p, figureWidth, designFigureHeight)
}

// designLevels is the number of colours of the design matrix ramp.
const designLevels = 64

// designCells draws a design matrix as one rectangle per run of volumes
// whose scaled values share a colour: column j spans x in [j, j+1], volume
// t spans y in [n-t-1, n-t]. Each column is scaled from its minimum
// (paper) to its maximum (ink); a constant column shows as its maximum.
type designCells struct{ x *mat.Dense }

func (dc designCells) Plot(c draw.Canvas, plt *plot.Plot) {
	trX, trY := plt.Transforms(&c)
	n, k := dc.x.Dims()
	level := make([]int, n)
	for j := 0; j < k; j++ {
		lo, hi := math.Inf(1), math.Inf(-1)
		for t := 0; t < n; t++ {
			v := dc.x.At(t, j)
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
		for t := 0; t < n; t++ {
			s := 1.0
			if hi > lo {
				s = (dc.x.At(t, j) - lo) / (hi - lo)
			}
			level[t] = int(math.Round(s * (designLevels - 1)))
		}
		for t := 0; t < n; {
			end := t + 1
			for end < n && level[end] == level[t] {
				end++
			}
			x0, x1 := trX(float64(j)), trX(float64(j+1))
			y0, y1 := trY(float64(n-end)), trY(float64(n-t))
			// Overlap the next cell by half a point so that antialiased
			// edges leave no seams; the next cell covers the overlap.
			if end < n {
				y0 -= 0.5
			}
			if j < k-1 {
				x1 += 0.5
			}
			c.FillPolygon(ramp(float64(level[t])/(designLevels-1)), []vg.Point{{X: x0, Y: y0}, {X: x1, Y: y0}, {X: x1, Y: y1}, {X: x0, Y: y1}})
			t = end
		}
	}
}

func (dc designCells) DataRange() (xmin, xmax, ymin, ymax float64) {
	n, k := dc.x.Dims()
	return 0, float64(k), 0, float64(n)
}

// ramp maps s in [0, 1] to the design matrix colours: paper, teal, ink.
func ramp(s float64) color.RGBA {
	mix := func(a, b color.RGBA, u float64) color.RGBA {
		f := func(x, y uint8) uint8 { return uint8(math.Round(float64(x) + u*(float64(y)-float64(x)))) }
		return color.RGBA{f(a.R, b.R), f(a.G, b.G), f(a.B, b.B), 0xFF}
	}
	s = math.Max(0, math.Min(1, s))
	if s < 0.6 {
		return mix(colPaper, colTeal, s/0.6)
	}
	return mix(colTeal, colInk, (s-0.6)/0.4)
}

// pick is one strongest subject-level result and the run that shows it
// best (the subject's run with the largest |t| in the region).
type pick struct {
	contrast string
	rank     int // 1 = strongest of its contrast
	subject  fit.SubjectResult
	run      *fit.RunResult
	index    int // region index in run
	region   *fit.RegionFit
	t        float64 // run-level t
}

// strongest picks, per contrast (the first figureContrasts), the figureTop
// subject-level results by |t|.
func strongest(res *fit.StudyResult) []pick {
	var out []pick
	for ci, c := range res.Contrasts {
		if ci == figureContrasts {
			break
		}
		var rows []int
		var ts []float64
		for i, s := range res.Subjects {
			if s.Contrast == c.Name && finite(s.Statistic) {
				rows = append(rows, i)
				ts = append(ts, math.Abs(s.Statistic))
			}
		}
		rank := 0
		for _, k := range rankOrder(ts, largerFirst) {
			if rank == figureTop {
				break
			}
			s := res.Subjects[rows[k]]
			best := pick{contrast: c.Name, subject: s, t: math.NaN()}
			for _, r := range res.Runs {
				if r.Fit == nil || !r.Valid[ci] || r.Plan.Run.Spec.Subject != s.Subject {
					continue
				}
				for ri := range r.Fit.Regions {
					reg := &r.Fit.Regions[ri]
					if reg.Region != s.Region || reg.Skip != "" {
						continue
					}
					t := r.Contrasts[ci][ri].Statistic
					if best.run == nil || math.Abs(t) > math.Abs(best.t) {
						best.run, best.index, best.region, best.t = r, ri, reg, t
					}
				}
			}
			if best.run != nil {
				rank++
				best.rank = rank
				out = append(out, best)
			}
		}
	}
	return out
}

// byRank orders picks by rank, then contrast order: the strongest of each
// contrast first.
func byRank(ps []pick) []pick {
	out := append([]pick(nil), ps...)
	sort.SliceStable(out, func(i, j int) bool { return out[i].rank < out[j].rank })
	return out
}

// fitted returns X β.
func fitted(x *mat.Dense, beta []float64) []float64 {
	n, _ := x.Dims()
	v := mat.NewVecDense(n, nil)
	v.MulVec(x, mat.NewVecDense(len(beta), beta))
	return v.RawVector().Data
}

// observedFitted returns the pick's observed signal over the kept volumes
// and its fitted values X β; ok is false when the signals are not at hand.
func observedFitted(pk pick) (y, yhat []float64, ok bool) {
	ys, err := pk.run.Plan.Signals()
	if err != nil || ys == nil {
		return nil, nil, false
	}
	return ys[pk.index], fitted(pk.run.Plan.Design.X, pk.region.Beta), true
}

// timeCourse draws the observed signal and the fitted model of one pick.
func (fw *figureWriter) timeCourse(pk pick) {
	r := pk.run
	y, yhat, ok := observedFitted(pk)
	if !ok {
		return
	}
	tr := r.Plan.TR
	obs := make(plotter.XYs, len(y))
	fitXY := make(plotter.XYs, len(y))
	lo, hi := math.Inf(1), math.Inf(-1)
	for t := range y {
		obs[t] = plotter.XY{X: float64(t) * tr, Y: y[t]}
		fitXY[t] = plotter.XY{X: float64(t) * tr, Y: yhat[t]}
		lo, hi = math.Min(lo, math.Min(y[t], yhat[t])), math.Max(hi, math.Max(y[t], yhat[t]))
	}
	key := r.Plan.Run.Spec.Key()
	p := newPlot(fmt.Sprintf("%s #%d: subject %s, region %s (run %s, t = %.2f)", pk.contrast, pk.rank, pk.subject.Subject, pk.subject.Region, key, pk.t),
		"time from the first kept volume (s)", "signal")
	lo1 := addLine(p, obs, colObserved, 1, false)
	lo2 := addLine(p, fitXY, colFitted, 1.8, false)
	p.Legend.Add("observed", lo1)
	p.Legend.Add("fitted (X β, every term)", lo2)
	p.Legend.Top = true
	// Headroom so that the legend does not cover the data.
	p.Y.Min, p.Y.Max = lo-0.05*(hi-lo), hi+0.22*(hi-lo)
	fw.save(fmt.Sprintf("timecourse_%s_%d", fileSafe(pk.contrast), pk.rank),
		fmt.Sprintf("Observed signal (grey) and fitted model (orange) of %s in subject %s, run %s, result %d by |t| of contrast %s (subject t = %.2f): the fit should follow the task-locked rises and falls, not only the slow drift.",
			pk.subject.Region, pk.subject.Subject, key, pk.rank, pk.contrast, pk.subject.Statistic), p, figureWidth, figureHeight)
}

// autocorr returns the sample autocorrelation of e at lags 1..lags:
// r_k = sum_t e_t e_(t+k) / sum_t e_t².
func autocorr(e []float64, lags int) []float64 {
	ss := 0.0
	for _, v := range e {
		ss += v * v
	}
	out := make([]float64, lags)
	if ss == 0 {
		return out
	}
	for k := 1; k <= lags; k++ {
		s := 0.0
		for t := 0; t+k < len(e); t++ {
			s += e[t] * e[t+k]
		}
		out[k-1] = s / ss
	}
	return out
}

// autocorrelation draws the residual autocorrelation of one pick before
// whitening (y - Xβ) and after (the same residuals passed through the
// region's whitener, RegionFit.NoiseWhitener).
func (fw *figureWriter) autocorrelation(pk pick) {
	r := pk.run
	y, yhat, ok := observedFitted(pk)
	if !ok {
		return
	}
	raw := make([]float64, len(y))
	for t := range y {
		raw[t] = y[t] - yhat[t]
	}
	white, err := pk.region.NoiseWhitener(len(raw))
	if err != nil {
		fw.err = fmt.Errorf("figure of region %s: %v", pk.region.Region, err)
		return
	}
	wr := make([]float64, len(raw))
	white.Apply(wr, raw)
	lags := min(acfLags, len(raw)-1)
	if lags < 1 {
		return
	}
	before, after := autocorr(raw, lags), autocorr(wr, lags)
	key := r.Plan.Run.Spec.Key()
	model := "no whitening (ordinary least squares)"
	if len(pk.region.AR) > 0 {
		cs := make([]string, len(pk.region.AR))
		for i, a := range pk.region.AR {
			cs[i] = fmt.Sprintf("%.2f", a)
		}
		model = fmt.Sprintf("AR(%d) coefficients %s", len(pk.region.AR), strings.Join(cs, ", "))
		if len(pk.region.MA) > 0 {
			model = fmt.Sprintf("ARMA(1,1) φ %.2f, θ %.2f", pk.region.AR[0], pk.region.MA[0])
		}
	}
	p := newPlot(fmt.Sprintf("Residual autocorrelation: run %s, region %s (%s)", key, pk.region.Region, model), "lag (volumes)", "autocorrelation")
	width := vg.Points(14)
	b1, _ := plotter.NewBarChart(plotter.Values(before), width)
	b1.Color, b1.LineStyle.Width = colMustard, 0
	if len(pk.region.AR) == 0 {
		p.Add(b1)
		p.Legend.Add("residuals (y − X β), not whitened", b1)
	} else {
		b2, _ := plotter.NewBarChart(plotter.Values(after), width)
		b2.Color, b2.LineStyle.Width, b2.Offset = colTeal, 0, width/2
		b1.Offset = -width / 2
		p.Add(b1, b2)
		p.Legend.Add("before whitening (y − X β)", b1)
		p.Legend.Add("after whitening", b2)
	}
	p.Legend.Top = true
	band := 2 / math.Sqrt(float64(len(raw)))
	for _, s := range []float64{-band, band} {
		addLine(p, plotter.XYs{{X: -0.5, Y: s}, {X: float64(lags) - 0.5, Y: s}}, colGuide, 1, true)
	}
	addLine(p, plotter.XYs{{X: -0.5, Y: 0}, {X: float64(lags) - 0.5, Y: 0}}, colInk, 0.6, false)
	names := make([]string, lags)
	for i := range names {
		names[i] = fmt.Sprint(i + 1)
	}
	p.NominalX(names...)
	lo, hi := -band, band
	for _, v := range append(append([]float64(nil), before...), after...) {
		lo, hi = math.Min(lo, v), math.Max(hi, v)
	}
	p.Y.Min, p.Y.Max = lo-0.05*(hi-lo), hi+0.3*(hi-lo)
	caption := fmt.Sprintf("Residual autocorrelation at lags 1-%d of %s in run %s: after whitening (teal) the bars should sit inside the dashed ±2/√n band; bars beyond it mean the noise model leaves structure.", lags, pk.region.Region, key)
	if len(pk.region.AR) == 0 {
		caption = fmt.Sprintf("Residual autocorrelation at lags 1-%d of %s in run %s, fitted by ordinary least squares (nothing is whitened): bars beyond the dashed ±2/√n band are autocorrelation that the p values ignore; consider --noise ar1.", lags, pk.region.Region, key)
	}
	fw.save(fmt.Sprintf("autocorrelation_%s_%s", fileSafe(key), fileSafe(pk.region.Region)), caption,
		p, figureWidth, figureHeight)
}

// displacement draws a run's framewise displacement with its censored
// volumes marked, and the --censor-fd threshold when one was set.
func (fw *figureWriter) displacement(r *fit.RunResult, threshold float64) {
	fd := r.Plan.FD
	cens := r.Plan.Design.Censored
	line := make(plotter.XYs, len(fd))
	var marked plotter.XYs
	for t, v := range fd {
		line[t] = plotter.XY{X: float64(t), Y: v}
		if cens != nil && cens[t] {
			marked = append(marked, line[t])
		}
	}
	key := r.Plan.Run.Spec.Key()
	p := newPlot(fmt.Sprintf("Framewise displacement, run %s (%d of %d volumes censored)", key, len(marked), len(fd)), "volume", "framewise displacement (mm)")
	l := addLine(p, line, colInk, 1, false)
	p.Legend.Add("framewise displacement", l)
	if len(marked) > 0 {
		sc, _ := plotter.NewScatter(marked)
		sc.GlyphStyle = draw.GlyphStyle{Color: colCrimson, Radius: vg.Points(3), Shape: draw.CircleGlyph{}}
		p.Add(sc)
		p.Legend.Add("censored volume", sc)
	}
	hi := threshold
	for _, v := range fd {
		hi = math.Max(hi, v)
	}
	if threshold > 0 {
		g := addLine(p, plotter.XYs{{X: 0, Y: threshold}, {X: float64(len(fd) - 1), Y: threshold}}, colCrimson, 1, true)
		p.Legend.Add(fmt.Sprintf("--censor-fd %g mm", threshold), g)
	}
	p.Legend.Top = true
	p.Y.Min, p.Y.Max = 0, math.Max(hi*1.3, 1e-3)
	fw.save("displacement_"+fileSafe(key),
		fmt.Sprintf("Framewise displacement of run %s, censored volumes (if any) in red: look for spikes and long stretches of movement; estimates near them are less trustworthy.", key),
		p, figureWidth, figureHeight)
}

// fir draws the FIR response to one condition in percent signal change:
// the mean over regions (each region's curve averaged over its runs) with
// ± one standard error across regions, and the firTop regions with the
// largest peak |psc|.
func (fw *figureWriter) fir(res *fit.StudyResult, cond string) {
	type curve struct {
		sum   []float64
		count []int
	}
	var times []float64
	curves := map[string]*curve{}
	var order []string
	for _, r := range res.Runs {
		if r.Fit == nil {
			continue
		}
		d := r.Plan.Design
		var cols []int
		var ts []float64
		for _, j := range d.ConditionTerms(cond) {
			if d.Terms[j].Kind == fit.TermFIR {
				cols = append(cols, j)
				ts = append(ts, d.Terms[j].Time)
			}
		}
		if len(cols) == 0 {
			continue
		}
		if times == nil {
			times = ts
		}
		if len(ts) != len(times) {
			continue // bins differ from the first run's; not averaged
		}
		for _, reg := range r.Fit.Regions {
			if reg.Skip != "" || !reg.HasPSC() {
				continue
			}
			c := curves[reg.Region]
			if c == nil {
				c = &curve{sum: make([]float64, len(times)), count: make([]int, len(times))}
				curves[reg.Region] = c
				order = append(order, reg.Region)
			}
			for b, j := range cols {
				c.sum[b] += reg.PSC(reg.Beta[j])
				c.count[b]++
			}
		}
	}
	if len(order) == 0 {
		return
	}
	mean := func(c *curve) []float64 {
		m := make([]float64, len(times))
		for b := range m {
			m[b] = c.sum[b] / float64(c.count[b])
		}
		return m
	}
	regional := make([][]float64, len(order))
	peak := make([]float64, len(order))
	for i, name := range order {
		regional[i] = mean(curves[name])
		for _, v := range regional[i] {
			peak[i] = math.Max(peak[i], math.Abs(v))
		}
	}
	avg := make(plotter.XYs, len(times))
	errs := make(plotter.YErrors, len(times))
	for b, t := range times {
		s, ss := 0.0, 0.0
		for _, c := range regional {
			s += c[b]
		}
		m := s / float64(len(regional))
		for _, c := range regional {
			ss += (c[b] - m) * (c[b] - m)
		}
		se := 0.0
		if len(regional) > 1 {
			se = math.Sqrt(ss/float64(len(regional)-1)) / math.Sqrt(float64(len(regional)))
		}
		avg[b] = plotter.XY{X: t, Y: m}
		errs[b].Low, errs[b].High = se, se
	}
	p := newPlot(fmt.Sprintf("FIR response to %s (%d regions)", cond, len(order)), "time after onset (s)", "response (% of baseline)")
	idx := make([]int, len(order))
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(a, b int) bool { return peak[idx[a]] > peak[idx[b]] })
	for k, i := range idx {
		if k == firTop {
			break
		}
		xy := make(plotter.XYs, len(times))
		for b, t := range times {
			xy[b] = plotter.XY{X: t, Y: regional[i][b]}
		}
		l := addLine(p, xy, regionColours[k%len(regionColours)], 1.2, false)
		p.Legend.Add(order[i], l)
	}
	ml := addLine(p, avg, colInk, 2.2, false)
	eb, _ := plotter.NewYErrorBars(struct {
		plotter.XYs
		plotter.YErrors
	}{avg, errs})
	eb.LineStyle.Color, eb.LineStyle.Width = colInk, vg.Points(1.2)
	p.Add(eb)
	p.Legend.Add("mean over regions ± standard error", ml)
	p.Legend.Top = true
	addLine(p, plotter.XYs{{X: times[0], Y: 0}, {X: times[len(times)-1], Y: 0}}, colGuide, 1, true)
	lo, hi := 0.0, 0.0
	for b := range times {
		lo, hi = math.Min(lo, avg[b].Y-errs[b].Low), math.Max(hi, avg[b].Y+errs[b].High)
		for _, i := range idx[:min(firTop, len(idx))] {
			lo, hi = math.Min(lo, regional[i][b]), math.Max(hi, regional[i][b])
		}
	}
	p.Y.Min, p.Y.Max = lo-0.05*(hi-lo), hi+0.35*(hi-lo)
	fw.save("fir_"+fileSafe(cond),
		fmt.Sprintf("FIR response to %s, in percent of baseline: the mean over regions ± standard error (dark) and the %d regions with the largest peak; a response should rise a few seconds after onset, peak and return towards zero.", cond, min(firTop, len(order))),
		p, figureWidth, figureHeight)
}

// newPlot makes a plot in the report's style.
func newPlot(title, xlabel, ylabel string) *plot.Plot {
	p := plot.New()
	p.Title.Text = title
	p.Title.TextStyle.Color = colInk
	p.Title.TextStyle.Font.Size = vg.Points(11)
	p.X.Label.Text, p.Y.Label.Text = xlabel, ylabel
	for _, a := range []*plot.Axis{&p.X, &p.Y} {
		a.Label.TextStyle.Color = colInk
		a.Label.TextStyle.Font.Size = vg.Points(10)
		a.Tick.Label.Color = colInk
		a.Tick.Label.Font.Size = vg.Points(9)
		a.Color, a.Tick.Color = colInk, colInk
	}
	p.Legend.TextStyle.Font.Size = vg.Points(9)
	p.Legend.TextStyle.Color = colInk
	return p
}

// addLine adds a line to p and returns it (for the legend).
func addLine(p *plot.Plot, xy plotter.XYs, c color.Color, width float64, dashed bool) *plotter.Line {
	kept := make(plotter.XYs, 0, len(xy))
	for _, pt := range xy {
		if finite(pt.X) && finite(pt.Y) {
			kept = append(kept, pt)
		}
	}
	l, err := plotter.NewLine(kept)
	if err != nil {
		panic("report: figure line: " + err.Error()) // unreachable: points are finite
	}
	l.LineStyle.Color, l.LineStyle.Width = c, vg.Points(width)
	if dashed {
		l.LineStyle.Dashes = []vg.Length{vg.Points(4), vg.Points(3)}
	}
	p.Add(l)
	return l
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// fileSafe keeps letters, digits, '-', '_' and '.' of a name for a file
// name and replaces anything else (and a leading '.') with '-'.
func fileSafe(s string) string {
	b := []byte(s)
	for i, c := range b {
		ok := c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '-' || c == '_' || c == '.'
		if !ok {
			b[i] = '-'
		}
	}
	if len(b) == 0 {
		return "figure"
	}
	if b[0] == '.' {
		b[0] = '-' // not a hidden file
	}
	return string(b)
}
