//go:build !unix

package store

const openReadFlags = 0
