//go:build !unix

package main

// noFollow is 0 where open has no such flag; checkTarget's Lstat still refuses a link.
const noFollow = 0
