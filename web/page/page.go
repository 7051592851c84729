// Package page is the daemon's browser page, embedded in the binary: plain
// HTML, CSS and JavaScript written by hand, with no build step and no
// network dependency, served from the daemon itself.
package page

import (
	"embed"
	"html/template"
	"io"
	"io/fs"
)

//go:embed static
var static embed.FS

// Static holds the page's assets (app.js, plot.js, style.css) at its root.
var Static fs.FS

var index *template.Template

func init() {
	sub, err := fs.Sub(static, "static")
	if err != nil {
		panic(err)
	}
	Static = sub
	index = template.Must(template.ParseFS(static, "static/index.html"))
}

// Data is what the index page is rendered with.
type Data struct {
	// Token is the access token handed to this page, "" when none is
	// required or this request may not have it.
	Token string
	// NeedToken says the daemon requires a token; a page without one shows
	// how to get it.
	NeedToken bool
	Version   string
}

// Index writes the index page.
func Index(w io.Writer, d Data) error {
	return index.Execute(w, d)
}
