package page

import (
	"html/template"
	"io"
)

var line = template.Must(template.ParseFS(static, "static/line.html"))

// Line renders the production-line page (serial number in, verdict out)
// with d.
func Line(w io.Writer, d Data) error { return line.Execute(w, d) }
