package main

import (
	"bufio"
	"fmt"
	"html/template"
	"io"
	"math"
	"strconv"
	"strings"
	"unicode"

	"manyfold/encoders/pipeline"
	"manyfold/internal/jsonout"
	"manyfold/io/atomicfile"
)

// driftError is apply's drift over --fail-on: the output and the report
// were written, and the exit code (exitDrift) tells a nightly job to stop.
type driftError struct {
	failed []pipeline.Breach
}

func (e *driftError) Error() string {
	cols := map[string]bool{}
	for _, b := range e.failed {
		cols[b.Column] = true
	}
	return fmt.Sprintf("drift over --fail-on: %d figures of %d columns over their thresholds (listed above); the output was written", len(e.failed), len(cols))
}

// breachLine describes a figure over its threshold for stderr.
func breachLine(b pipeline.Breach) string {
	return fmt.Sprintf("drift: column %q: %s %s > %s (--fail-on %s=%s)", b.Column, b.Measure, fmtFig(b.Value),
		fmtFig(b.Threshold), b.Measure, strconv.FormatFloat(b.Threshold, 'g', -1, 64))
}

// fmtFig formats a figure with four significant digits.
func fmtFig(v float64) string { return strconv.FormatFloat(v, 'g', 4, 64) }

// isHTMLReport reports whether a --report path asks for the HTML page.
func isHTMLReport(path string) bool {
	p := strings.ToLower(path)
	return strings.HasSuffix(p, ".html") || strings.HasSuffix(p, ".htm")
}

// createDriftReports writes the report to each path, as HTML for a path
// ending in .html or .htm and as JSON otherwise, each to a temporary file
// that the caller commits (atomicfile.CommitAll) with the output or
// aborts.
func createDriftReports(rep *pipeline.DriftReport, paths []string) ([]atomicfile.Output, error) {
	var outs []atomicfile.Output
	fail := func(err error) ([]atomicfile.Output, error) {
		for _, o := range outs {
			o.Abort()
		}
		return nil, &outputError{err}
	}
	for _, p := range paths {
		f, err := atomicfile.Create(p)
		if err != nil {
			return fail(fmt.Errorf("report: %w", err))
		}
		outs = append(outs, f)
		write := writeDriftJSON
		if isHTMLReport(p) {
			write = writeDriftHTML
		}
		if err := write(f, rep); err != nil {
			return fail(fmt.Errorf("write %s: %w", p, err))
		}
	}
	return outs, nil
}

// writeDriftJSON writes the report as indented JSON.
func writeDriftJSON(w io.Writer, rep *pipeline.DriftReport) error {
	data, err := jsonout.Marshal(rep)
	if err != nil {
		return err
	}
	_, err = w.Write(data)
	return err
}

// writeDriftHTML writes the report as one self-contained HTML page: inline
// CSS, no scripts, nothing fetched; a table of figures per column, its
// unseen levels and its PSI bins, and the definitions of the figures.
func writeDriftHTML(w io.Writer, rep *pipeline.DriftReport) error {
	bw := bufio.NewWriter(w)
	if err := driftTemplate.Execute(bw, driftView(rep)); err != nil {
		return err
	}
	return bw.Flush()
}

// driftPage is the report as the template shows it: every string final.
type driftPage struct {
	Title   string
	Header  [][2]string
	Failed  []string
	Columns []driftColumnView
}

type driftColumnView struct {
	Name      string
	Anchor    string
	Figures   [][2]string
	Top       [][2]string
	TopNote   string
	Bins      [][4]string
	Breaching bool
}

func driftView(rep *pipeline.DriftReport) driftPage {
	p := driftPage{Title: "manyfold apply: drift of " + clean(rep.File)}
	target := "not in the file"
	if rep.Target != nil {
		target = clean(*rep.Target) + " (" + rep.Task + ")"
	}
	p.Header = [][2]string{{"Tool", rep.Tool}, {"File", clean(rep.File)}, {"Tables", clean(rep.Tables)},
		{"Rows", strconv.FormatInt(rep.Rows, 10)}, {"Target", target},
		{"Unseen levels listed", fmt.Sprintf("with at least %d rows", rep.MinLevelRows)},
		{"--fail-on", thresholdsText(rep.FailOn)}}
	failing := map[string]bool{}
	for _, b := range rep.Failed {
		p.Failed = append(p.Failed, fmt.Sprintf("%s: %s %s > %s", clean(b.Column), b.Measure, fmtFig(b.Value), fmtFig(b.Threshold)))
		failing[b.Column] = true
	}
	for i, c := range rep.Columns {
		v := driftColumnView{Name: clean(c.Column), Anchor: "c" + strconv.Itoa(i+1), Breaching: failing[c.Column]}
		atLeast := ""
		if c.UnseenCapped {
			atLeast = "at least "
		}
		v.Figures = [][2]string{
			{"Unseen rows", fmt.Sprintf("%d of %d (%s)", c.UnseenRows, rep.Rows, sharePct(c.UnseenRowShare))},
			{"Unseen levels", fmt.Sprintf("%s%d of %s%d (%s)", atLeast, c.UnseenLevels, atLeast, c.Levels, sharePct(c.UnseenLevelShare))},
			{"PSI", optFig(c.PSI)},
		}
		if s := c.Score; s != nil {
			name := strings.ToUpper(s.Metric)
			v.Figures = append(v.Figures,
				[2]string{name + " of " + clean(s.Output) + ", new rows", fmt.Sprintf("%s (%d rows)", optFig(s.New), s.Rows)},
				[2]string{name + " of " + clean(s.Output) + ", training rows", optFig(s.Training)},
				[2]string{"Change", optFig(s.Change)})
		}
		for _, u := range c.TopUnseen {
			v.Top = append(v.Top, [2]string{levelText(u.Level), strconv.FormatInt(u.Rows, 10)})
		}
		v.TopNote = fmt.Sprintf("%d unseen levels with fewer than %d rows are not listed.", c.Withheld, rep.MinLevelRows)
		if c.UnseenCapped {
			v.TopNote += fmt.Sprintf(" More distinct unseen values were met than are counted; %d rows of the later ones are in none of the levels listed.", c.UncountedRows)
		}
		for _, b := range c.Bins {
			name := levelText(b.Level)
			if b.Other {
				name = "(every other level)"
			}
			v.Bins = append(v.Bins, [4]string{name, fmt.Sprintf("%d (%s)", b.TrainingRows, sharePct(b.Expected)), fmt.Sprintf("%d (%s)", b.Rows, sharePct(b.Actual)), fmtFig(psiTerm(b.Expected, b.Actual))})
		}
		p.Columns = append(p.Columns, v)
	}
	return p
}

// psiTerm is a bin's term of the PSI, (a - e) ln(a / e), shares of 0
// floored as pipeline.PSI floors them.
func psiTerm(e, a float64) float64 {
	return pipeline.PSI([]float64{e}, []float64{a})
}

func sharePct(v float64) string { return strconv.FormatFloat(100*v, 'f', 2, 64) + "%" }

func optFig(v *float64) string {
	if v == nil || math.IsNaN(*v) {
		return "n/a"
	}
	return fmtFig(*v)
}

func levelText(l *string) string {
	if l == nil {
		return "(null)"
	}
	return clean(*l)
}

// thresholdsText lists the thresholds given, "none" for none.
func thresholdsText(t pipeline.Thresholds) string {
	var parts []string
	for _, th := range []struct {
		name string
		v    *float64
	}{{"unseen", t.Unseen}, {"levels", t.Levels}, {"psi", t.PSI}, {"auc_drop", t.AUCDrop}, {"rmse_rise", t.RMSERise}} {
		if th.v != nil {
			parts = append(parts, th.name+"="+strconv.FormatFloat(*th.v, 'g', -1, 64))
		}
	}
	if parts == nil {
		return "none"
	}
	return strings.Join(parts, ",")
}

// clean makes a value of the data printable: valid UTF-8, control
// characters shown as U+FFFD (the template escapes the rest).
func clean(s string) string {
	return strings.Map(func(r rune) rune {
		if unicode.IsControl(r) {
			return unicode.ReplacementChar
		}
		return r
	}, strings.ToValidUTF8(s, "\uFFFD"))
}

var driftTemplate = template.Must(template.New("drift").Parse(driftHTML))

const driftHTML = `<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8" />
<meta name="viewport" content="width=device-width, initial-scale=1" />
<title>{{.Title}}</title>
<style>
body { font-family: system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial, sans-serif; color: #1d1d1d; background: #ffffff; max-width: 1000px; margin: 0 auto; padding: 24px 28px 48px; line-height: 1.45; }
h1 { font-size: 1.5em; margin: 0 0 0.6em; }
h2 { font-size: 1.25em; margin: 0 0 0.3em; }
h3 { font-size: 1em; margin: 1.2em 0 0.3em; color: #333333; }
.meta { display: grid; grid-template-columns: max-content 1fr; gap: 2px 18px; margin: 0 0 1.2em; }
.meta dt { color: #555555; }
.meta dd { margin: 0; overflow-wrap: anywhere; }
section.column { border-top: 2px solid #d8d8d8; padding-top: 1em; margin-top: 1.6em; }
.failed { color: #9b1c1c; font-weight: 600; }
.none { color: #666666; font-style: italic; }
table { border-collapse: collapse; font-size: 0.88em; font-variant-numeric: tabular-nums; margin: 0.3em 0 0.6em; break-inside: avoid; page-break-inside: avoid; }
th, td { border-bottom: 1px solid #dddddd; padding: 4px 8px; text-align: right; white-space: nowrap; }
th:first-child, td:first-child { text-align: left; white-space: normal; overflow-wrap: anywhere; min-width: 8em; }
p.note { font-size: 0.88em; color: #444444; }
@media print { body { max-width: none; padding: 0; } }
</style>
</head>
<body>
<h1>{{.Title}}</h1>
<dl class="meta">
{{range .Header}}<dt>{{index . 0}}</dt><dd>{{index . 1}}</dd>
{{end}}</dl>
{{if .Failed}}<p class="failed">Over the --fail-on thresholds:</p>
<ul class="failed">
{{range .Failed}}<li>{{.}}</li>
{{end}}</ul>
{{else}}<p>No figure over a --fail-on threshold.</p>
{{end}}
{{range .Columns}}<section class="column" id="{{.Anchor}}">
<h2>{{.Name}}{{if .Breaching}} <span class="failed">(over a threshold)</span>{{end}}</h2>
<table>
{{range .Figures}}<tr><td>{{index . 0}}</td><td>{{index . 1}}</td></tr>
{{end}}</table>
<h3>Unseen levels with the most rows</h3>
{{if .Top}}<table>
<tr><th>level</th><th>rows</th></tr>
{{range .Top}}<tr><td>{{index . 0}}</td><td>{{index . 1}}</td></tr>
{{end}}</table>
{{else}}<p class="none">none listed</p>
{{end}}<p class="note">{{.TopNote}}</p>
<h3>PSI bins</h3>
<table>
<tr><th>level</th><th>training rows (share)</th><th>new rows (share)</th><th>term</th></tr>
{{range .Bins}}<tr><td>{{index . 0}}</td><td>{{index . 1}}</td><td>{{index . 2}}</td><td>{{index . 3}}</td></tr>
{{end}}</table>
</section>
{{end}}
<section>
<h2>Definitions</h2>
<p class="note">Unseen rows: the rows whose level the mapping tables do not hold (or hold as unseen: left out by --min-level-rows, the null level with --nulls unseen); the encodings give them the prior. Unseen levels: the distinct levels of the file that are unseen, the null level counting as a level, over the file's distinct levels.</p>
<p class="note">PSI, the population stability index, common practice in credit scoring (for example Siddiqi, Credit Risk Scorecards, 2006): PSI = Σ (a<sub>i</sub> − e<sub>i</sub>) ln(a<sub>i</sub> / e<sub>i</sub>) over the bins i, the training table's 20 levels of the most rows and one bin for every other level; e<sub>i</sub> is the bin's share of the training rows (the tables' rows over the manifest's), a<sub>i</sub> its share of the file's rows. A share of 0 counts as 0.0001 (common practice), so the logarithm stays finite. By a rule of thumb, below 0.1 is no real shift and above 0.25 a large one.</p>
<p class="note">AUC: the probability that a positive row's encoded value exceeds a negative row's, ties counting one half (the Mann-Whitney form; Hanley and McNeil, Radiology 143, 1982). RMSE: the square root of the mean squared difference between the encoded value and the target. The training value is that of the training rows' out-of-fold values, recorded by encode; the change is the new value less the training value.</p>
</section>
</body>
</html>
`
