package batch

import "regexp"

var (
	regexpPage = regexp.MustCompile(`<page width="([0-9.]+)" height="([0-9.]+)"`)
	regexpWord = regexp.MustCompile(`<word xMin="([0-9.]+)" yMin="([0-9.]+)" xMax="([0-9.]+)" yMax="([0-9.]+)">([^<]*)</word>`)
)
