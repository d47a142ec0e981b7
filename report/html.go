package report

import (
	"bytes"
	"encoding/base64"
	"fmt"
	"html"
	"image/color"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"

	"github.com/lagstar/lagstar/catalog"
	"github.com/lagstar/lagstar/diagnostics"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
)

// Draws holds a run's kept draws by column: Values[chain][column][draw].
type Draws struct {
	Names  []string
	Values [][][]float64
}

// PPCStat is one posterior predictive statistic for the report; Title
// and Unit describe its kind (for figure titles and axes).
type PPCStat struct {
	Name, Kind, Title, Unit                 string
	Observed, RepMean, RepLow, RepHigh, PPP float64
}

var chainColors = []color.Color{
	color.RGBA{R: 31, G: 119, B: 180, A: 255}, color.RGBA{R: 255, G: 127, B: 14, A: 255},
	color.RGBA{R: 44, G: 160, B: 44, A: 255}, color.RGBA{R: 214, G: 39, B: 40, A: 255},
	color.RGBA{R: 148, G: 103, B: 189, A: 255}, color.RGBA{R: 140, G: 86, B: 75, A: 255},
}

// maxPanels is the most parameters drawn in one figure; more go into
// further figures, never dropped.
const maxPanels = 24

// WriteHTML writes one self-contained HTML page (figures embedded as PNG, no
// network): the run, the model and data, warnings and cautions, the summary
// table, trace, rank and density plots of the tabled quantities, and the
// posterior predictive checks when ppc is not nil.
func WriteHTML(w io.Writer, s *Summary, d *Draws, ppc []PPCStat) error {
	var b strings.Builder
	esc := html.EscapeString
	b.WriteString(`<!DOCTYPE html><html lang="en"><head><meta charset="utf-8"><title>lagstar report</title><style>
body{font-family:system-ui,sans-serif;max-width:1100px;margin:2em auto;color:#222}
table{border-collapse:collapse;font-size:13px}td,th{padding:2px 8px;text-align:right}td:first-child,th:first-child{text-align:left}
tr.warn td{background:#fde2e1}h2{border-bottom:1px solid #ccc;margin-top:1.6em}.caution{background:#fff6d6;padding:.6em 1em}
img{max-width:100%}.alarm{background:#b00020;color:#fff;padding:.8em 1em;font-weight:600}</style></head><body>`)
	status := "complete and converged"
	switch {
	case !s.Complete:
		status = "INCOMPLETE (interrupted)"
	case !s.Converged:
		status = "complete but NOT CONVERGED"
	}
	fmt.Fprintf(&b, "<h1>lagstar report</h1><p>%s %s, seed %d, run %s.</p>", esc(s.Program), esc(s.Version), s.Seed, status)
	if !s.Complete {
		fmt.Fprintf(&b, `<p class="alarm">This run was interrupted: its draws are incomplete. Finish it with lagstar fit --resume before reading anything here.</p>`)
	}
	if note := diagnostics.UnconvergedNote(s.Unconverged, "Do not report these results"); note != "" {
		fmt.Fprintf(&b, `<p class="alarm">%s Rows of these parameters are marked red below.</p>`, esc(note))
	}
	fmt.Fprintf(&b, `<p class="caution">%s</p>`, esc(Caution))
	m := s.Model
	b.WriteString("<h2>Model and data</h2><ul>")
	fmt.Fprintf(&b, "<li>Data: %s, %s, %s, %s (%s)</li>", esc(m.DataFile), count(m.Rows, "row", "rows"), count(m.Persons, "person", "persons"), count(len(m.Occasions), "occasion", "occasions"), esc(occasionRange(m.Occasions)))
	for _, o := range m.Outcomes {
		fmt.Fprintf(&b, "<li>Outcome %s</li>", esc(OutcomeLine(o)))
	}
	fmt.Fprintf(&b, "<li>Random intercepts: %v; carry-over: %s; residual correlation: %v; paths over time: %s; first occasion: %s; means over time: %s</li>",
		m.RandomIntercepts, esc(m.Lags), m.ResidualCorrelation, esc(m.PathsOverTime), esc(m.FirstOccasion), esc(m.MeansOverTime))
	if m.MovingAverage {
		b.WriteString("<li>Within parts: ARMA(1,1) (moving average on the previous innovation)</li>")
	}
	if m.RandomSlopes {
		sc := make([]string, len(m.TimeScores))
		for k, v := range m.TimeScores {
			sc[k] = strconv.FormatFloat(v, 'g', -1, 64)
		}
		fmt.Fprintf(&b, "<li>Growth: random intercepts and slopes over the time scores %s (correlated; the means follow the growth line)</li>", esc(strings.Join(sc, ", ")))
	}
	fmt.Fprintf(&b, "<li>Sampler: %s, %d warm-up, %s, threshold update %s</li>", count(m.Chains, "chain", "chains"), m.Warmup, count(m.Draws, "draw", "draws"), esc(m.ThresholdUpdate))
	for _, p := range m.Priors {
		fmt.Fprintf(&b, "<li>Prior: %s</li>", esc(p))
	}
	b.WriteString("</ul>")
	if len(s.Warnings) > 0 {
		b.WriteString("<h2>Warnings</h2><ul>")
		for _, x := range s.Warnings {
			fmt.Fprintf(&b, "<li>%s</li>", esc(x))
		}
		b.WriteString("</ul>")
	}
	tabled := append(append([]Entry{}, s.Parameters...), tableOnly(s.Derived)...)
	level := 0.95
	if len(tabled) > 0 {
		level = float64(tabled[0].Level)
	}
	b.WriteString("<h2>Estimates</h2><table><tr>")
	for _, c := range columnHeads(level) {
		fmt.Fprintf(&b, "<th>%s</th>", esc(c))
	}
	b.WriteString("</tr>")
	for _, e := range tabled {
		cls := ""
		if entryBad(e) {
			cls = ` class="warn"`
		}
		fmt.Fprintf(&b, "<tr%s><td>%s</td><td>%s</td><td>%s</td><td>%s</td><td>%s</td><td>%s</td><td>%s</td><td>%s</td></tr>", cls, esc(e.Name),
			f3(e.Mean), f3(e.SD), f3(e.Lower), f3(e.Upper), fr(e.Rhat), f0(e.ESSBulk), f0(e.ESSTail))
	}
	b.WriteString("</table>")
	if effects := probabilityEntries(s.Derived); len(effects) > 0 {
		b.WriteString("<h2>Effects on the probability scale</h2><p>Posterior means and central intervals of every carry-over and cross-lag into a categorical outcome restated as a change in probability (binary outcomes) or in the mean category (ordinal ones); see README, \"The output folder\". Associations under the model, not causal effects.</p>")
		for _, g := range []struct{ prefix, title, unit string }{
			{"prob_", "Change in the probability of the upper category (average over persons)", "change in probability"},
			{"score_", "Change in the mean category (average over persons)", "change in mean category"},
		} {
			var group []Entry
			for _, e := range effects {
				if strings.HasPrefix(e.Kind, g.prefix) {
					group = append(group, e)
				}
			}
			if len(group) == 0 {
				continue
			}
			png, err := effectsPNG(g.title, g.unit, group)
			if err != nil {
				return err
			}
			fmt.Fprintf(&b, "<img class=\"figure\" alt=\"%s\" src=\"data:image/png;base64,%s\">", esc(g.title), base64.StdEncoding.EncodeToString(png))
		}
	}
	if figs, err := impulseFigures(s.Derived); err != nil {
		return err
	} else if len(figs) > 0 {
		b.WriteString("<h2>Impulse responses</h2><p>The response of each outcome's latent within part, occasion by occasion, to a one-sd innovation in one outcome (posterior mean and central interval); categorical outcomes' responses on the probability scale are in summary.json (impulse_probability_*, impulse_score_*). The model's dynamics, not causal effects.</p>")
		for _, f := range figs {
			fmt.Fprintf(&b, "<img class=\"figure\" alt=\"%s\" src=\"data:image/png;base64,%s\">", esc(f.title), base64.StdEncoding.EncodeToString(f.png))
		}
	}
	var names []string
	for _, e := range tabled {
		if slices.Contains(d.Names, e.Name) {
			names = append(names, e.Name)
		}
	}
	for _, fig := range []struct {
		title, x, y string
		fn          func(*plot.Plot, []([]float64))
	}{
		{"Trace plots: each parameter's kept draws, one colour per chain", "kept draw", "value", tracePanel},
		{"Rank plots: ranks of all draws in 20 bins, one line per chain; flat, overlapping lines mean the chains agree", "rank bin", "draws", rankPanel},
		{"Posterior densities: all chains' draws", "value", "density", densityPanel},
	} {
		fmt.Fprintf(&b, "<h2>%s</h2>", esc(fig.title))
		for start := 0; start < len(names); start += maxPanels {
			page := names[start:min(start+maxPanels, len(names))]
			png, err := gridPNG(page, d, fig.x, fig.y, fig.fn)
			if err != nil {
				return err
			}
			fmt.Fprintf(&b, "<img class=\"figure\" alt=\"%s\" src=\"data:image/png;base64,%s\">", esc(fig.title), base64.StdEncoding.EncodeToString(png))
		}
	}
	if ppc != nil {
		b.WriteString("<h2>Posterior predictive checks</h2>")
		for _, group := range byKind(ppc) {
			pages, err := PPCPlotPages(group)
			if err != nil {
				return err
			}
			for _, png := range pages {
				fmt.Fprintf(&b, "<img class=\"figure\" alt=\"%s\" src=\"data:image/png;base64,%s\">", esc(group[0].Title), base64.StdEncoding.EncodeToString(png))
			}
		}
		b.WriteString("<table><tr><th>statistic</th><th>observed</th><th>replicated</th><th>90% lower</th><th>90% upper</th><th>p</th></tr>")
		for _, p := range ppc {
			cls := ""
			if p.PPP < 0.05 || p.PPP > 0.95 {
				cls = ` class="warn"`
			}
			fmt.Fprintf(&b, "<tr%s><td>%s</td><td>%.3f</td><td>%.3f</td><td>%.3f</td><td>%.3f</td><td>%.3f</td></tr>", cls, esc(p.Name), p.Observed, p.RepMean, p.RepLow, p.RepHigh, p.PPP)
		}
		b.WriteString("</table>")
	} else {
		b.WriteString("<h2>Posterior predictive checks</h2><p>Not run: use <code>lagstar check RUN_DIR</code>, then build the report again.</p>")
	}
	b.WriteString(`<script>window.addEventListener("load",function(){var n=0;document.querySelectorAll("img.figure").forEach(function(i){if(i.complete&&i.naturalWidth>0)n++});document.body.setAttribute("data-figures-loaded",n)});</script></body></html>`)
	_, err := io.WriteString(w, b.String())
	return err
}

// gridPNG draws one panel per name, filled by fn from the chains' draws,
// with axis labels x and y; the first panel carries the legend of the
// chains' colours.
func gridPNG(names []string, d *Draws, x, y string, fn func(*plot.Plot, [][]float64)) ([]byte, error) {
	if len(names) == 0 {
		return nil, fmt.Errorf("report: nothing to plot")
	}
	cols := min(len(names), 4)
	rows := (len(names) + cols - 1) / cols
	plots := make([][]*plot.Plot, rows)
	for r := range plots {
		plots[r] = make([]*plot.Plot, cols)
	}
	for q, name := range names {
		col := slices.Index(d.Names, name)
		chains := make([][]float64, len(d.Values))
		for c := range d.Values {
			chains[c] = d.Values[c][col]
		}
		p := plot.New()
		p.Title.Text = name
		p.Title.TextStyle.Font.Size = vg.Points(9)
		p.X.Label.Text, p.Y.Label.Text = x, y
		p.X.Label.TextStyle.Font.Size = vg.Points(7)
		p.Y.Label.TextStyle.Font.Size = vg.Points(7)
		p.X.Tick.Label.Font.Size = vg.Points(7)
		p.Y.Tick.Label.Font.Size = vg.Points(7)
		fn(p, chains)
		if q == 0 && len(chains) > 1 {
			for c := range chains {
				sw, err := plotter.NewLine(plotter.XYs{{X: 0, Y: 0}})
				if err == nil {
					sw.Color = chainColors[c%len(chainColors)]
					sw.Width = vg.Points(2)
					p.Legend.Add(fmt.Sprintf("chain %d", c+1), sw)
				}
			}
			p.Legend.Top = true
			p.Legend.TextStyle.Font.Size = vg.Points(6)
		}
		plots[q/cols][q%cols] = p
	}
	img := vgimg.New(vg.Points(230*float64(cols)), vg.Points(170*float64(rows)))
	drawGrid(plots, draw.New(img))
	var buf bytes.Buffer
	_, err := vgimg.PngCanvas{Canvas: img}.WriteTo(&buf)
	return buf.Bytes(), err
}

func tracePanel(p *plot.Plot, chains [][]float64) {
	for c, x := range chains {
		step := max(1, len(x)/400)
		var xy plotter.XYs
		for i := 0; i < len(x); i += step {
			xy = append(xy, plotter.XY{X: float64(i + 1), Y: x[i]})
		}
		if l, err := plotter.NewLine(xy); err == nil {
			l.Color = chainColors[c%len(chainColors)]
			l.Width = vg.Points(0.5)
			p.Add(l)
		}
	}
}

func rankPanel(p *plot.Plot, chains [][]float64) {
	var all []float64
	for _, x := range chains {
		all = append(all, x...)
	}
	sorted := slices.Clone(all)
	slices.Sort(sorted)
	const bins = 20
	for c, x := range chains {
		count := make([]float64, bins)
		for _, v := range x {
			r, _ := slices.BinarySearch(sorted, v)
			count[min(r*bins/len(sorted), bins-1)]++
		}
		var xy plotter.XYs
		for k, n := range count {
			xy = append(xy, plotter.XY{X: float64(k), Y: n}, plotter.XY{X: float64(k + 1), Y: n})
		}
		if l, err := plotter.NewLine(xy); err == nil {
			l.Color = chainColors[c%len(chainColors)]
			p.Add(l)
		}
	}
	p.Y.Min = 0
}

func densityPanel(p *plot.Plot, chains [][]float64) {
	var all plotter.Values
	for _, x := range chains {
		all = append(all, x...)
	}
	if h, err := plotter.NewHist(all, 40); err == nil {
		h.Normalize(1)
		h.FillColor = color.RGBA{R: 120, G: 150, B: 200, A: 255}
		h.LineStyle.Width = 0
		p.Add(h)
	}
}

// PPCPerPage is the most statistics drawn in one predictive-check
// figure; more go on further pages, never dropped.
const PPCPerPage = 40

// PPCPlotPages draws statistics of one kind, each as the replicated 90%
// interval (a bar) and the observed value (a dot; red when its p-value is
// outside (0.05, 0.95)), PPCPerPage to a PNG page, with a title naming
// the kind (its Title, and the page when there are several), axis labels
// (statistic; the kind's Unit) and a legend.
func PPCPlotPages(stats []PPCStat) ([][]byte, error) {
	var pages [][]byte
	n := (len(stats) + PPCPerPage - 1) / PPCPerPage
	for k := 0; k < n; k++ {
		page := stats[k*PPCPerPage : min((k+1)*PPCPerPage, len(stats))]
		title := page[0].Title
		if title == "" {
			title = page[0].Kind
		}
		title = strings.ToUpper(title[:1]) + title[1:]
		title += ": observed against replicated 90% intervals"
		if n > 1 {
			title += fmt.Sprintf(" (page %d of %d)", k+1, n)
		}
		png, err := ppcPage(title, page)
		if err != nil {
			return nil, err
		}
		pages = append(pages, png)
	}
	return pages, nil
}

func ppcPage(title string, stats []PPCStat) ([]byte, error) {
	p := plot.New()
	p.Title.Text = title
	p.X.Label.Text = "statistic"
	p.Y.Label.Text = stats[0].Unit
	if p.Y.Label.Text == "" {
		p.Y.Label.Text = "value"
	}
	p.X.Tick.Label.Rotation = math.Pi / 2
	p.X.Tick.Label.XAlign = draw.XRight
	p.X.Tick.Label.Font.Size = vg.Points(8)
	p.Y.Tick.Label.Font.Size = vg.Points(8)
	names := make([]string, len(stats))
	var seenBar, seenDot, seenRed bool
	for k, s := range stats {
		names[k] = s.Name
		bar, err := plotter.NewLine(plotter.XYs{{X: float64(k), Y: s.RepLow}, {X: float64(k), Y: s.RepHigh}})
		if err != nil {
			return nil, err
		}
		bar.Width = vg.Points(4)
		bar.Color = color.RGBA{R: 150, G: 170, B: 210, A: 255}
		p.Add(bar)
		dot, err := plotter.NewScatter(plotter.XYs{{X: float64(k), Y: s.Observed}})
		if err != nil {
			return nil, err
		}
		dot.GlyphStyle.Radius = vg.Points(2.5)
		dot.Color = color.Black
		red := s.PPP < 0.05 || s.PPP > 0.95
		if red {
			dot.Color = color.RGBA{R: 210, A: 255}
		}
		p.Add(dot)
		if !seenBar {
			p.Legend.Add("replicated 90% interval", bar)
			seenBar = true
		}
		if red && !seenRed {
			p.Legend.Add("observed, p outside (0.05, 0.95)", dot)
			seenRed = true
		} else if !red && !seenDot {
			p.Legend.Add("observed", dot)
			seenDot = true
		}
	}
	// Headroom above the data for the legend.
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, s := range stats {
		lo, hi = min(lo, s.RepLow, s.Observed), max(hi, s.RepHigh, s.Observed)
	}
	if hi > lo {
		p.Y.Min, p.Y.Max = lo-0.05*(hi-lo), hi+0.25*(hi-lo)
	}
	p.Legend.Top = true
	p.Legend.TextStyle.Font.Size = vg.Points(8)
	p.NominalX(names...)
	return pngOf(p, vg.Points(math.Max(480, 16*float64(len(stats)))), vg.Points(380))
}

// occasionRange describes the occasion grid in words: "1 to 42" or
// "2017 to 2022 by 1", never as a Go list.
func occasionRange(occ []int) string {
	switch len(occ) {
	case 0:
		return "none"
	case 1:
		return fmt.Sprint(occ[0])
	}
	if step := occ[1] - occ[0]; step != 1 {
		return fmt.Sprintf("%d to %d by %d", occ[0], occ[len(occ)-1], step)
	}
	return fmt.Sprintf("%d to %d", occ[0], occ[len(occ)-1])
}

// byKind splits statistics into runs of one kind, in order of first
// appearance, so that shares, run lengths and correlations never share
// an axis.
func byKind(stats []PPCStat) [][]PPCStat {
	var order []string
	groups := map[string][]PPCStat{}
	for _, s := range stats {
		if _, ok := groups[s.Kind]; !ok {
			order = append(order, s.Kind)
		}
		groups[s.Kind] = append(groups[s.Kind], s)
	}
	out := make([][]PPCStat, len(order))
	for i, k := range order {
		out[i] = groups[k]
	}
	return out
}

// probabilityEntries returns the tabled derived entries of the
// probability-scale section, averaged over persons (the typical-person
// ones are in the table).
func probabilityEntries(derived []Entry) []Entry {
	var out []Entry
	for _, e := range derived {
		if k, ok := catalog.Lookup(e.Kind); ok && k.Section == catalog.Probability && k.Tabled && strings.HasSuffix(e.Kind, "_average") {
			out = append(out, e)
		}
	}
	return out
}

// effectsPNG draws each entry's posterior interval as a bar with its mean
// as a dot, against a line at 0.
func effectsPNG(title, unit string, es []Entry) ([]byte, error) {
	p := plot.New()
	p.Title.Text = title
	p.X.Label.Text = "path (predictor at t-1 -> outcome at t)"
	p.Y.Label.Text = unit
	p.X.Tick.Label.Rotation = math.Pi / 2
	p.X.Tick.Label.XAlign = draw.XRight
	p.X.Tick.Label.Font.Size = vg.Points(8)
	p.Y.Tick.Label.Font.Size = vg.Points(8)
	names := make([]string, len(es))
	zero, err := plotter.NewLine(plotter.XYs{{X: -0.5, Y: 0}, {X: float64(len(es)) - 0.5, Y: 0}})
	if err != nil {
		return nil, err
	}
	zero.Color = color.Gray{Y: 120}
	zero.Dashes = []vg.Length{vg.Points(3), vg.Points(3)}
	p.Add(zero)
	for k, e := range es {
		names[k] = strings.Replace(e.Name, "_average", "", 1)
		bar, err := plotter.NewLine(plotter.XYs{{X: float64(k), Y: float64(e.Lower)}, {X: float64(k), Y: float64(e.Upper)}})
		if err != nil {
			return nil, err
		}
		bar.Width = vg.Points(4)
		bar.Color = color.RGBA{R: 150, G: 170, B: 210, A: 255}
		p.Add(bar)
		dot, err := plotter.NewScatter(plotter.XYs{{X: float64(k), Y: float64(e.Mean)}})
		if err != nil {
			return nil, err
		}
		dot.GlyphStyle.Radius = vg.Points(2.5)
		dot.Color = color.Black
		p.Add(dot)
		if k == 0 {
			p.Legend.Add(fmt.Sprintf("%.0f%% interval", 100*float64(e.Level)), bar)
			p.Legend.Add("posterior mean", dot)
		}
	}
	lo, hi := 0.0, 0.0
	for _, e := range es {
		lo, hi = min(lo, float64(e.Lower)), max(hi, float64(e.Upper))
	}
	if hi > lo { // headroom above the data for the legend
		p.Y.Min, p.Y.Max = lo-0.05*(hi-lo), hi+0.25*(hi-lo)
	}
	p.Legend.Top = true
	p.Legend.TextStyle.Font.Size = vg.Points(8)
	p.NominalX(names...)
	return pngOf(p, vg.Points(math.Max(480, 22*float64(len(es)))), vg.Points(420))
}

type figure struct {
	title string
	png   []byte
}

// impulseFigures draws one figure per shocked outcome: each outcome's
// latent impulse response against the horizon, the posterior mean as a
// line and the central interval as a band.
func impulseFigures(derived []Entry) ([]figure, error) {
	type series struct {
		to     string
		points []Entry
	}
	var shocks []string
	byShock := map[string][]*series{}
	for _, e := range derived {
		if e.Kind != "impulse_response" {
			continue
		}
		ss, ok := byShock[e.From]
		if !ok {
			shocks = append(shocks, e.From)
		}
		if len(ss) == 0 || ss[len(ss)-1].to != e.Outcome {
			ss = append(ss, &series{to: e.Outcome})
			byShock[e.From] = ss
		}
		ss[len(ss)-1].points = append(ss[len(ss)-1].points, e)
	}
	var figs []figure
	for _, k := range shocks {
		p := plot.New()
		p.Title.Text = fmt.Sprintf("Impulse responses to a one-sd innovation in %s", k)
		p.X.Label.Text = "occasions after the innovation"
		p.Y.Label.Text = "latent within-part response"
		for c, sr := range byShock[k] {
			col := chainColors[c%len(chainColors)]
			band := make(plotter.XYs, 0, 2*len(sr.points))
			line := make(plotter.XYs, 0, len(sr.points))
			for _, e := range sr.points {
				band = append(band, plotter.XY{X: float64(e.Index), Y: float64(e.Lower)})
				line = append(line, plotter.XY{X: float64(e.Index), Y: float64(e.Mean)})
			}
			for q := len(sr.points) - 1; q >= 0; q-- {
				e := sr.points[q]
				band = append(band, plotter.XY{X: float64(e.Index), Y: float64(e.Upper)})
			}
			poly, err := plotter.NewPolygon(band)
			if err != nil {
				return nil, err
			}
			r, g, bl, _ := col.RGBA()
			poly.Color = color.NRGBA{R: uint8(r >> 8), G: uint8(g >> 8), B: uint8(bl >> 8), A: 60}
			poly.LineStyle.Width = 0
			poly.LineStyle.Color = color.Transparent
			p.Add(poly)
			l, err := plotter.NewLine(line)
			if err != nil {
				return nil, err
			}
			l.Color = col
			l.Width = vg.Points(1.5)
			p.Add(l)
			p.Legend.Add(sr.to, l)
		}
		zero, err := plotter.NewLine(plotter.XYs{{X: 1, Y: 0}, {X: float64(len(byShock[k][0].points)), Y: 0}})
		if err != nil {
			return nil, err
		}
		zero.Color = color.Gray{Y: 120}
		zero.Dashes = []vg.Length{vg.Points(3), vg.Points(3)}
		p.Add(zero)
		p.Legend.Top = true
		p.Legend.TextStyle.Font.Size = vg.Points(8)
		png, err := pngOf(p, vg.Points(480), vg.Points(320))
		if err != nil {
			return nil, err
		}
		figs = append(figs, figure{p.Title.Text, png})
	}
	return figs, nil
}

// pngOf renders p as a PNG of width w and height h.
func pngOf(p *plot.Plot, w, h vg.Length) ([]byte, error) {
	var buf bytes.Buffer
	wt, err := p.WriterTo(w, h, "png")
	if err != nil {
		return nil, err
	}
	if _, err := wt.WriteTo(&buf); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}
