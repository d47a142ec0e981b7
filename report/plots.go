package report

import (
	"fmt"
	"image/color"
	"io"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
)

// RankHistogramsPNG draws one histogram of simulation-based-calibration
// ranks per quantity (counts[q][bin], reps replications in all) in a grid,
// with the central 99% band of a Binomial(reps, 1/bins) count shaded: bars
// outside the band on many quantities point at a miscalibrated sampler
// (Talts et al. 2018, §4). It writes a PNG to w.
func RankHistogramsPNG(w io.Writer, title string, names []string, counts [][]int, reps int) error {
	n := len(names)
	if n == 0 {
		return fmt.Errorf("report: no quantities to plot")
	}
	cols := min(n, 4)
	rows := (n + cols - 1) / cols
	bins := len(counts[0])
	binom := distuv.Binomial{N: float64(reps), P: 1 / float64(bins)}
	lo, hi := binomQuantile(binom, 0.005), binomQuantile(binom, 0.995)
	plots := make([][]*plot.Plot, rows)
	for r := range plots {
		plots[r] = make([]*plot.Plot, cols)
	}
	for q, name := range names {
		p := plot.New()
		p.Title.Text = name
		p.Title.TextStyle.Font.Size = vg.Points(8)
		p.X.Tick.Label.Font.Size = vg.Points(6)
		p.Y.Tick.Label.Font.Size = vg.Points(6)
		band, err := plotter.NewPolygon(plotter.XYs{{X: 0, Y: lo}, {X: float64(bins), Y: lo}, {X: float64(bins), Y: hi}, {X: 0, Y: hi}})
		if err != nil {
			return err
		}
		band.Color = color.RGBA{R: 200, G: 200, B: 200, A: 255}
		band.LineStyle.Width = 0
		p.Add(band)
		vals := make(plotter.Values, bins)
		for b, c := range counts[q] {
			vals[b] = float64(c)
		}
		bar, err := plotter.NewBarChart(vals, vg.Points(60/float64(bins)+2))
		if err != nil {
			return err
		}
		bar.Color = color.RGBA{R: 60, G: 100, B: 170, A: 255}
		bar.LineStyle.Width = 0
		bar.XMin = 0.5
		p.Add(bar)
		p.X.Min, p.X.Max = 0, float64(bins)
		p.Y.Min = 0
		p.Y.Max = math.Max(hi, float64(maxInt(counts[q]))) * 1.1
		plots[q/cols][q%cols] = p
	}
	width, height := vg.Points(170*float64(cols)), vg.Points(130*float64(rows)+30)
	img := vgimg.New(width, height)
	dc := draw.New(img)
	head := dc.Rectangle
	head.Min.Y = head.Max.Y - vg.Points(24)
	dc.FillText(draw.TextStyle{Color: color.Black, Font: plot.DefaultFont, XAlign: draw.XCenter, YAlign: draw.YCenter, Handler: plot.DefaultTextHandler},
		vg.Point{X: width / 2, Y: height - vg.Points(12)}, title)
	body := draw.Crop(dc, 0, 0, 0, -vg.Points(24))
	drawGrid(plots, body)
	_, err := vgimg.PngCanvas{Canvas: img}.WriteTo(w)
	return err
}

func binomQuantile(b distuv.Binomial, p float64) float64 {
	for k := 0.0; k <= b.N; k++ {
		if b.CDF(k) >= p {
			return k
		}
	}
	return b.N
}

func maxInt(xs []int) int {
	m := 0
	for _, x := range xs {
		m = max(m, x)
	}
	return m
}

// drawGrid lays the plots out as a rows x columns grid on dc and draws them
// (nil plots leave their tile empty).
func drawGrid(plots [][]*plot.Plot, dc draw.Canvas) {
	tiles := draw.Tiles{Rows: len(plots), Cols: len(plots[0]), PadX: vg.Points(6), PadY: vg.Points(6),
		PadTop: vg.Points(2), PadBottom: vg.Points(2), PadLeft: vg.Points(2), PadRight: vg.Points(2)}
	canvases := plot.Align(plots, tiles, dc)
	for r := range plots {
		for c := range plots[r] {
			if plots[r][c] != nil {
				plots[r][c].Draw(canvases[r][c])
			}
		}
	}
}
