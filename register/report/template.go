package report

import "html/template"

// pageTemplate is the page. html/template escapes every value it is given
// for its place (text, attribute), so an id or a file name cannot add
// markup; only the figures, drawn by this package, go in as HTML.
func pageTemplate() *template.Template {
	return template.Must(template.New("report").Parse(pageHTML))
}

const pageHTML = `<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta name="generator" content="ferry {{.Version}}">
<meta name="ferry-provenance" content="{{.Provenance}}">
<title>{{.Title}}</title>
<style>
:root { --ink: #1b1b1b; --muted: #555; --rule: #d9d9d9; --flag: #D55E00; --band: #eaf5fc; }
* { box-sizing: border-box; }
body { margin: 0; color: var(--ink); background: #fff; font: 15px/1.5 "Liberation Sans", Arimo, Arial, Helvetica, sans-serif; }
.page { max-width: 1040px; margin: 0 auto; padding: 28px 32px 40px; }
h1 { font-size: 26px; margin: 0 0 4px; }
h2 { font-size: 20px; margin: 36px 0 8px; padding-top: 12px; border-top: 1px solid var(--rule); }
h3 { font-size: 16px; margin: 20px 0 6px; }
p { margin: 6px 0 10px; }
code { font-family: "Liberation Mono", Cousine, Menlo, Consolas, monospace; font-size: 0.92em; word-break: break-all; }
.sub { color: var(--muted); margin-top: 0; }
.caution { border-left: 5px solid var(--flag); background: #fdf1e8; padding: 10px 14px; margin: 14px 0 18px; }
.facts { display: grid; grid-template-columns: max-content 1fr; gap: 4px 18px; margin: 12px 0; }
.facts dt { font-weight: bold; }
.facts dd { margin: 0; }
.ok { color: #006b4f; font-weight: bold; }
.bad { color: var(--flag); font-weight: bold; }
nav { margin: 16px 0 0; padding: 8px 12px; background: #f5f5f5; font-size: 14px; }
nav a { color: #0060a0; margin-right: 14px; text-decoration: none; white-space: nowrap; }
nav a:hover { text-decoration: underline; }
figure { margin: 10px 0 8px; }
svg.fig { display: block; max-width: 100%; height: auto; }
figcaption { color: var(--muted); font-size: 14px; max-width: 900px; margin-top: 6px; }
.note { background: var(--band); border-left: 5px solid #0072B2; padding: 8px 12px; }
table { border-collapse: collapse; margin: 8px 0 12px; font-size: 14px; }
th, td { padding: 4px 10px; border-bottom: 1px solid var(--rule); text-align: left; vertical-align: top; }
th { background: #f5f5f5; font-weight: bold; }
td.num, th.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
tr.flagged td { color: var(--flag); }
tr.chosen td { font-weight: bold; background: var(--band); }
tr.failed td { color: var(--muted); }
details { margin: 8px 0; }
summary { cursor: pointer; color: #0060a0; }
footer { margin-top: 40px; padding-top: 12px; border-top: 1px solid var(--rule); color: var(--muted); font-size: 13px; }
footer ul { padding-left: 18px; margin: 4px 0; }
@media print { nav { display: none; } h2 { break-before: auto; } figure { break-inside: avoid; } }
</style>
</head>
<body>
<div class="page">
<header>
<h1>Registration report</h1>
<p class="sub">Leave-one-out check of <code>{{.LandmarkFile}}</code>: {{.N}} landmark pairs, {{.DimWords}}{{if .Excluded}}, with {{.Excluded}} excluded{{end}}.</p>
<p class="caution"><strong>For research use.</strong> These results come from a statistical model of the landmarks you picked. They must be checked by eye, in both volumes, before tracing starts.</p>
<dl class="facts">
<dt>Model</dt><dd>{{.Model}}{{if .Smoothing}} (smoothing {{.Smoothing}}){{end}}{{if .Mirrored}}, mirrored (the target was imaged from the other face){{end}}.</dd>
<dt>Why this model</dt><dd>{{.Reason}}.</dd>
{{if .SmoothingNote}}<dt>Smoothing</dt><dd>{{.SmoothingNote}}</dd>
{{end}}<dt>Transform</dt><dd>{{if .TransformFrom}}from <code>{{.TransformFrom}}</code>, with the check made when it was fitted{{else}}fitted for this report from the landmarks, with the settings in the footer{{end}}.</dd>
<dt>Leave-one-out error</dt><dd>RMS {{.RMS}} µm, median {{.Median}} µm, largest {{.Max}} µm (flagged landmarks left out).</dd>
<dt>Calibration</dt><dd>{{.CalibrationShare}}; 95 % are expected.</dd>
<dt>Flagged</dt><dd>{{if .FlaggedRows}}<span class="bad">{{len .FlaggedRows}} landmark(s) look wrong:</span>{{range $i, $r := .FlaggedRows}}{{if $i}},{{end}} <code>{{$r.ID}}</code>{{end}}. They are still in the transform: check them in both volumes, then correct them or refit with <code>--exclude {{.ExcludeFlagged}}</code>.{{else}}<span class="ok">none</span>: no landmark looks wrong.{{end}}</dd>
</dl>
{{if .FlaggedRows}}<table>
<tr><th>landmark</th><th>kind</th><th class="num">error µm</th><th class="num">R95 µm</th><th>why it is flagged</th></tr>
{{range .FlaggedRows}}<tr class="flagged"><td><code>{{.ID}}</code></td><td>{{.Kind}}</td><td class="num">{{.Error}}</td><td class="num">{{.R95}}</td><td>{{.Flag}}</td></tr>
{{end}}</table>{{end}}
<nav><a href="#errors">Errors</a><a href="#vectors">Error vectors</a><a href="#map">Uncertainty map</a><a href="#calibration">Calibration</a><a href="#models">Models</a>{{if .Cells}}<a href="#cells">Mapped cells</a>{{end}}{{if .Matches}}<a href="#matches">Matches</a>{{end}}<a href="#provenance">Provenance</a></nav>
</header>
<main>
<section id="errors">
<h2>Leave-one-out error of every landmark</h2>
<p>Each landmark is predicted from all the others; its error is the distance between the prediction and where it was picked in the target. The band is the landmark's own predicted 95 % radius R95: about one landmark in twenty of a good set falls beyond its band. A flagged landmark is one whose error the model cannot explain even allowing for that.</p>
<figure>{{.ErrorsFigure}}<figcaption>Landmarks sorted by leave-one-out error, largest on top. Blue circles passed the check; vermillion triangles are flagged, with the gist of the reason (the table above gives it whole).</figcaption></figure>
<details><summary>Every landmark's numbers</summary>
<table>
<tr><th>landmark</th><th>kind</th><th class="num">error µm</th><th class="num">error vector µm (target axes)</th><th class="num">R95 µm</th><th class="num">score</th><th>flag</th></tr>
{{range .Landmarks}}<tr{{if .Flag}} class="flagged"{{end}}><td><code>{{.ID}}</code></td><td>{{.Kind}}</td><td class="num">{{.Error}}{{if .Outside}} &gt; R95{{end}}</td><td class="num">{{.Components}}</td><td class="num">{{.R95}}</td><td class="num">{{.Score}}</td><td>{{.Flag}}</td></tr>
{{end}}</table>
</details>
<h3>By kind</h3>
<table>
<tr><th>kind</th><th class="num">landmarks</th><th class="num">RMS µm</th><th class="num">median µm</th><th class="num">largest µm</th><th class="num">flagged</th></tr>
{{range .Kinds}}<tr><td>{{.Kind}}</td><td class="num">{{.N}}</td><td class="num">{{.RMS}}</td><td class="num">{{.Median}}</td><td class="num">{{.Max}}</td><td class="num">{{.Flagged}}</td></tr>
{{end}}</table>
</section>
<section id="vectors">
<h2>Error vectors in the source volume</h2>
<p>Errors that point the same way in one part of the field say the model misses a warp there; a lone long arrow is a mistake in one landmark; arrows along z alone suggest a wrong section.</p>
{{if .VectorsFigure}}<figure>{{.VectorsFigure}}<figcaption>{{.VectorsCaption}}</figcaption></figure>{{else}}<p class="note">{{.VectorsNote}}</p>{{end}}
</section>
<section id="map">
<h2>Predicted uncertainty over the imaged field</h2>
<p>How far a cell mapped from each place of the field may lie from where ferry puts it. It grows away from the landmarks and fast outside their hull; more landmarks where it is large shrink it.</p>
{{if .MapFigure}}<figure>{{.MapFigure}}<figcaption>{{.MapCaption}}</figcaption></figure>{{else}}<p class="note">{{.MapNote}}</p>{{end}}
</section>
<section id="calibration">
<h2>Calibration of the predicted errors</h2>
<p>Each landmark's leave-one-out error, standardised by its predicted covariance, is a χ² score with {{.Dim}} degrees of freedom when the model predicts it as well as it claims. For each share p, the curve gives the share of landmarks whose score is at most the χ² quantile at p. On a well-calibrated check it follows the diagonal, within the band.</p>
<figure>{{.CalibrationFigure}}<figcaption>{{.CalibrationText}} Flagged landmarks are left out; the band is the pointwise binomial 95 % range of the share at each p.</figcaption></figure>
</section>
<section id="models">
<h2>Models compared</h2>
<p>Every model the landmarks support, scored by the exact leave-one-out error of the landmarks that passed the check. The chosen model is highlighted.</p>
<table>
<tr><th>model</th><th class="num">RMS µm</th><th class="num">median µm</th><th class="num">largest µm</th><th class="num">smoothing</th><th>note</th></tr>
{{range .Models}}<tr class="{{if .Chosen}}chosen{{else if .Failed}}failed{{end}}"><td>{{.Model}}{{if .Chosen}} (chosen){{end}}</td><td class="num">{{.RMS}}</td><td class="num">{{.Median}}</td><td class="num">{{.Max}}</td><td class="num">{{.Smoothing}}</td><td>{{.Note}}</td></tr>
{{end}}</table>
<p>Chosen: {{.Model}}, {{.Reason}}.</p>
</section>
{{with .Cells}}<section id="cells">
<h2>Mapped cells</h2>
<p><code>{{.File}}</code>: {{.N}} cells, median r95 {{.MedianR95}} µm, largest {{.MaxR95}} µm.{{if .NotPlaced}} {{.NotPlaced}} of them have no position to draw on the map.{{end}}</p>
<table>
<tr><th>status</th><th class="num">cells</th><th class="num">share</th></tr>
{{range .Counts}}<tr><td>{{.Status}}</td><td class="num">{{.N}}</td><td class="num">{{.Share}}</td></tr>
{{end}}</table>
</section>{{end}}
{{with .Matches}}<section id="matches">
<h2>Matches</h2>
<p><code>{{.File}}</code>: {{.N}} cells; the matched ones have a median match probability of {{.MedianP}} at a median distance of {{.MedianDist}} µm.</p>
<table>
<tr><th>status</th><th class="num">cells</th><th class="num">share</th></tr>
{{range .Counts}}<tr><td>{{.Status}}</td><td class="num">{{.N}}</td><td class="num">{{.Share}}</td></tr>
{{end}}</table>
{{if .Ambiguous}}<h3>Ambiguous cells</h3>
<p>No choice is clear for these cells: another candidate, or no counterpart at all, fits nearly as well. Look at them before tracing (<code>ferry review</code>).</p>
<table>
<tr><th>cell</th><th>candidate</th><th class="num">p match</th><th class="num">distance µm</th><th>runner-up</th><th class="num">p runner-up</th><th class="num">p no counterpart</th></tr>
{{range .Ambiguous}}<tr><td><code>{{.ID}}</code></td><td><code>{{.Candidate}}</code></td><td class="num">{{.PMatch}}</td><td class="num">{{.Distance}}</td><td>{{if .NoCounterpart}}no counterpart{{else}}<code>{{.RunnerUp}}</code>{{end}}</td><td class="num">{{.PRunnerUp}}</td><td class="num">{{.PNone}}</td></tr>
{{end}}</table>{{else}}<p>No cell is ambiguous.</p>{{end}}
</section>{{end}}
</main>
<footer id="provenance">
<p>Made by ferry {{.Version}} from:</p>
<ul>
{{range .Inputs}}<li><code>{{.Path}}</code> sha256 <code>{{.SHA256}}</code></li>
{{end}}</ul>
{{if .Flags}}<p>Settings: <code>{{.Flags}}</code></p>{{end}}
<p>The page holds no clock time: the same inputs and program version give the same file. It fetches nothing and runs no script.</p>
</footer>
</div>
</body>
</html>
`
