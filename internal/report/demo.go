package report

import (
	"html/template"
	"io"

	"github.com/tauvox/tauvox/internal/output"
)

// DemoSession is one session listed on the demo's index page.
type DemoSession struct {
	Date, Time  string
	Temperature float64
	Verdict     string
	Failed      int    // failed vial measurements
	Report      string // link to its report.html, relative to the index
}

// DemoIndex is the front page of a demo run: every session with a link to
// its QA report, and the link to the stability charts.
type DemoIndex struct {
	Scanner  string
	Phantom  string
	Sessions []DemoSession
	History  string // link to the history index.html, relative
	Drifting []string
	// Summary is the history's one-line summary (HistoryHeadline).
	Summary string
}

var demoTmpl = template.Must(template.New("demo").Funcs(template.FuncMap{
	"caution": func() string { return output.Caution },
	"inc":     func(i int) int { return i + 1 },
}).Parse(`<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<title>tauvox demo: {{.Scanner}}</title>
<style>
body{font-family:system-ui,-apple-system,"Segoe UI",Roboto,sans-serif;margin:2em auto;max-width:60em;color:#1b1b1b;padding:0 1em}
h1{font-size:1.5em;margin-bottom:.2em}
table{border-collapse:collapse;margin:1em 0}
th,td{border:1px solid #bbb;padding:.3em .7em;text-align:left}
th{background:#eef2f5}
td.fail{color:#a33b00;font-weight:600}
td.pass{color:#00684a}
.caution{background:#fbf6e4;border-left:4px solid #b08a00;padding:.5em 1em}
.box{border:2px solid #2a6f97;padding:.6em 1em;display:inline-block}
</style></head><body>
<h1>tauvox demo: {{.Phantom}}</h1>
<p>Scanner <strong>{{.Scanner}}</strong> · {{len .Sessions}} simulated monthly QA sessions (invented data).</p>
<p class="caution">{{caution}}</p>
<p class="box"><a href="{{.History}}">Stability charts and drift per year</a>{{if .Drifting}} — drifting: {{range $i, $d := .Drifting}}{{if $i}}, {{end}}{{$d}}{{end}}{{end}}</p>
{{if .Summary}}<p id="stability-summary"><b>Stability:</b> {{.Summary}}</p>{{end}}
<table>
<tr><th>session</th><th>date</th><th>time</th><th>temperature °C</th><th>verdict</th><th>failed</th><th>report</th></tr>
{{range $i, $s := .Sessions}}<tr><td>{{inc $i}}</td><td>{{$s.Date}}</td><td>{{$s.Time}}</td><td>{{printf "%.1f" $s.Temperature}}</td>
<td class="{{$s.Verdict}}">{{$s.Verdict}}</td><td>{{$s.Failed}}</td><td><a href="{{$s.Report}}">report.html</a></td></tr>
{{end}}</table>
</body></html>
`))

// WriteDemoIndex writes the demo's front page (html/template; every name
// escaped) atomically.
func WriteDemoIndex(path string, d *DemoIndex) error {
	return writeAtomic(path, func(w io.Writer) error { return demoTmpl.Execute(w, d) })
}
