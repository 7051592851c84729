package analysis

// NewMask builds a mask from its lines as written in another document
// (a plan's [mask] table), with the checks of LoadMask; file names the
// document in errors.
func NewMask(file, name string, relative bool, upper, lower [][]float64) (*Mask, error) {
	f := maskFile{Name: name, Relative: relative, Upper: upper, Lower: lower}
	return f.validate(file)
}
