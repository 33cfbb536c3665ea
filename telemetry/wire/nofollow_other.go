//go:build !unix

package wire

// noFollow is 0 where open has no such flag; the Lstat check still refuses a link.
const noFollow = 0
