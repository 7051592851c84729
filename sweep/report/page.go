package report

import (
	"fmt"
	"io"
	"strings"
	"time"

	"codeberg.org/go-fonts/liberation/liberationsansbold"
	"codeberg.org/go-fonts/liberation/liberationsansregular"
	"codeberg.org/go-pdf/fpdf"
)

// Paper is a page size.
type Paper string

// Paper sizes.
const (
	A4     Paper = "a4"     // 210 mm × 297 mm
	Letter Paper = "letter" // 8.5 in × 11 in
)

// ParsePaper checks a paper name ("" is A4).
func ParsePaper(s string) (Paper, error) {
	switch strings.ToLower(s) {
	case "", "a4":
		return A4, nil
	case "letter":
		return Letter, nil
	}
	return "", fmt.Errorf("report: paper %q: want a4 or letter", s)
}

// Layout constants, millimetres and points.
const (
	marginMM   = 14.0
	footerMM   = 20.0 // reserved at the bottom of each page for the safety statement and page line
	bodyPt     = 8.0
	smallPt    = 6.5
	headPt     = 9.5
	ptToMM     = 25.4 / 72
	lineFactor = 1.32 // line height as a multiple of the font size
)

// Greys used for ink: 0 black, 255 white.
const (
	inkText  = 0
	inkMuted = 85
	inkRule  = 150
	inkGrid  = 215
	inkBand  = 222
)

// Doc is a PDF document laid out top to bottom: a cursor Y moves down as
// blocks are added, and a block that would run into the footer starts a
// new page.
type Doc struct {
	pdf *fpdf.Fpdf
	// W and H are the page size, mm; Left and Right the text margins.
	W, H        float64
	Left, Right float64
	Y           float64
	// Bottom is the lowest y flow content may reach.
	Bottom float64
	footer func(d *Doc, page int)
	page   int
	// font is the current text style, restored after a footer.
	font struct {
		bold bool
		size float64
		grey int
	}
}

const family = "sans"

// NewDoc starts a document on paper: fonts embedded, creation date t
// (so that the same input gives the same file), first page added. footer,
// when not nil, draws each page's footer below Bottom.
func NewDoc(paper Paper, title string, t time.Time, footer func(d *Doc, page int)) *Doc {
	size := "A4"
	if paper == Letter {
		size = "Letter"
	}
	pdf := fpdf.New("P", "mm", size, "")
	pdf.SetCompression(true)
	pdf.SetAutoPageBreak(false, 0)
	pdf.SetMargins(marginMM, marginMM, marginMM)
	pdf.AddUTF8FontFromBytes(family, "", liberationsansregular.TTF)
	pdf.AddUTF8FontFromBytes(family, "B", liberationsansbold.TTF)
	pdf.SetTitle(title, true)
	pdf.SetCreator("rolloff", true)
	pdf.SetProducer("rolloff", true)
	if t.IsZero() {
		t = time.Unix(0, 0)
	}
	pdf.SetCreationDate(t.UTC())
	pdf.SetModificationDate(t.UTC())
	d := &Doc{pdf: pdf, footer: footer}
	d.W, d.H = pdf.GetPageSize()
	d.Left, d.Right = marginMM, d.W-marginMM
	d.Bottom = d.H - marginMM - footerMM
	d.NewPage()
	return d
}

// PDF returns the underlying document, for drawing.
func (d *Doc) PDF() *fpdf.Fpdf { return d.pdf }

// NewPage starts a page (drawing the finished page's footer).
func (d *Doc) NewPage() {
	d.pdf.AddPage()
	d.page++
	d.Y = marginMM
	if d.footer != nil {
		f := d.font
		d.footer(d, d.page)
		d.Font(f.bold, f.size, f.grey)
	}
}

// Pages returns the number of pages so far.
func (d *Doc) Pages() int { return d.page }

// Ensure starts a new page unless h mm fit above Bottom.
func (d *Doc) Ensure(h float64) {
	if d.Y+h > d.Bottom && d.Y > marginMM+0.1 {
		d.NewPage()
	}
}

// Font sets the font: bold or regular, size in points, grey ink.
func (d *Doc) Font(bold bool, sizePt float64, grey int) {
	style := ""
	if bold {
		style = "B"
	}
	d.pdf.SetFont(family, style, sizePt)
	d.pdf.SetTextColor(grey, grey, grey)
	d.font.bold, d.font.size, d.font.grey = bold, sizePt, grey
}

// LineH returns the line height of the current font, mm.
func (d *Doc) LineH() float64 {
	sz, _ := d.pdf.GetFontSize()
	return sz * ptToMM * lineFactor
}

// Text draws s with its baseline at y.
func (d *Doc) Text(x, y float64, s string) { d.pdf.Text(x, y, s) }

// TextRight draws s ending at x.
func (d *Doc) TextRight(x, y float64, s string) { d.pdf.Text(x-d.Width(s), y, s) }

// Width returns the width of s in the current font, mm.
func (d *Doc) Width(s string) float64 { return d.pdf.GetStringWidth(s) }

// Wrap breaks s into lines no wider than w in the current font, at
// spaces where it can and anywhere when a word is too long. Line breaks
// in s are kept. With maxLines > 0, text beyond maxLines lines is cut and
// the last line ends in "…".
func (d *Doc) Wrap(s string, w float64, maxLines int) []string {
	var out []string
	for _, para := range strings.Split(strings.ReplaceAll(s, "\t", "    "), "\n") {
		line := ""
		for _, word := range strings.Fields(para) {
			cand := word
			if line != "" {
				cand = line + " " + word
			}
			if d.Width(cand) <= w {
				line = cand
				continue
			}
			if line != "" {
				out = append(out, line)
				line = ""
			}
			for d.Width(word) > w {
				// Cut a word too long for a line.
				rs := []rune(word)
				n := len(rs) - 1
				for n > 1 && d.Width(string(rs[:n])) > w {
					n--
				}
				out = append(out, string(rs[:n]))
				word = string(rs[n:])
			}
			line = word
		}
		out = append(out, line)
	}
	for len(out) > 1 && out[len(out)-1] == "" {
		out = out[:len(out)-1]
	}
	if maxLines > 0 && len(out) > maxLines {
		out = out[:maxLines]
		last := []rune(out[maxLines-1])
		for len(last) > 0 && d.Width(string(last)+"…") > w {
			last = last[:len(last)-1]
		}
		out[maxLines-1] = strings.TrimRight(string(last), " ") + "…"
	}
	return out
}

// Para writes s wrapped between x and x+w from the cursor down, at most
// maxLines lines (0: no limit), starting a new page when needed, and
// moves the cursor below it.
func (d *Doc) Para(x, w float64, s string, maxLines int) {
	lh := d.LineH()
	for _, l := range d.Wrap(s, w, maxLines) {
		d.Ensure(lh)
		d.Text(x, d.Y+lh*0.78, l)
		d.Y += lh
	}
}

// Heading writes a section heading with a rule under it across w.
func (d *Doc) Heading(x, w float64, s string) {
	d.Font(true, headPt, inkText)
	lh := d.LineH()
	d.Ensure(lh + 3*bodyPt*ptToMM*lineFactor)
	d.Text(x, d.Y+lh*0.78, s)
	d.Y += lh
	d.Rule(x, w, 0.25, inkRule)
	d.Y += 0.8
}

// Rule draws a horizontal rule at the cursor.
func (d *Doc) Rule(x, w, width float64, grey int) {
	d.pdf.SetDrawColor(grey, grey, grey)
	d.pdf.SetLineWidth(width)
	d.pdf.SetDashPattern(nil, 0)
	d.pdf.Line(x, d.Y, x+w, d.Y)
}

// Row is one key and value of a Fields block.
type Row struct{ Key, Value string }

// Fields writes rows as a two-column table, keys in muted bold, values
// wrapped (at most maxLines lines each) in the rest of w.
func (d *Doc) Fields(x, w, keyW float64, rows []Row, maxLines int) {
	for _, r := range rows {
		d.Font(false, bodyPt, inkText)
		lines := d.Wrap(r.Value, w-keyW, maxLines)
		lh := d.LineH()
		d.Ensure(lh * float64(min(len(lines), 2)))
		d.Font(true, bodyPt, inkMuted)
		key := d.Wrap(r.Key, keyW-1, 1)[0]
		d.Text(x, d.Y+lh*0.78, key)
		d.Font(false, bodyPt, inkText)
		for _, l := range lines {
			d.Ensure(lh)
			d.Text(x+keyW, d.Y+lh*0.78, l)
			d.Y += lh
		}
	}
}

// Columns lays out two blocks side by side from the cursor, left in
// [Left, Left+w) and right in [Left+w+gap, Right), and leaves the cursor
// below the longer one. Each block gets its own cursor; a block that
// runs past Bottom continues on a new page.
func (d *Doc) Columns(gap float64, left, right func(x, w float64)) {
	w := (d.Right - d.Left - gap) / 2
	y0, p0 := d.Y, d.page
	left(d.Left, w)
	yl, pl := d.Y, d.page
	if d.page != p0 {
		// The left block broke the page: the right one follows it.
		right(d.Left+w+gap, w)
		d.Y = max(d.Y, yl)
		return
	}
	d.Y = y0
	right(d.Left+w+gap, w)
	if d.page == pl {
		d.Y = max(d.Y, yl)
	}
}

// Output writes the document.
func (d *Doc) Output(w io.Writer) error {
	if err := d.pdf.Error(); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	if err := d.pdf.Output(w); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	return nil
}
