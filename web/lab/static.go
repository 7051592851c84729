package lab

import (
	"embed"
	"io/fs"
)

//go:embed static
var embedded embed.FS

// staticFS holds the page: index.html, lab.js and lab.css.
var staticFS = func() interface {
	fs.FS
	fs.ReadFileFS
} {
	sub, err := fs.Sub(embedded, "static")
	if err != nil {
		panic(err)
	}
	return sub.(interface {
		fs.FS
		fs.ReadFileFS
	})
}()
