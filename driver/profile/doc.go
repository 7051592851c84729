// Package profile reads and validates rolloff's instrument profiles and
// bench files (TOML). An instrument profile describes one kind of
// instrument — a SCPI function generator, a SCPI DMM, an analog true-RMS
// converter, a SCPI switch — by its framing, limits and command templates;
// a bench file ties profiles to roles and addresses and sets the bench's
// own limits.
//
// Decoding is strict: an unknown key is an error. Every error names the
// file, the key (and its line where the document gives one), the bad value
// and what is allowed. Every command template is compiled when the profile
// is loaded, so a bad template is refused before anything is sent.
package profile
