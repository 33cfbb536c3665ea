package main

import (
	"fmt"
	"runtime/debug"
	"time"
)

// version is set at build time (go build -ldflags "-X main.version=1.2.0"); without it
// the module version and the revision from the build info are used.
var version = ""

// versionString says which caploop this is: the set version, or the module version and
// VCS revision the Go tool stamped into the binary, or "devel".
func versionString() string {
	if version != "" {
		return version
	}
	info, ok := debug.ReadBuildInfo()
	if !ok {
		return "devel"
	}
	return buildVersion(info)
}

func buildVersion(info *debug.BuildInfo) string {
	v := info.Main.Version
	if v == "" || v == "(devel)" {
		v = "devel"
	}
	var rev, at string
	dirty := false
	for _, s := range info.Settings {
		switch s.Key {
		case "vcs.revision":
			rev = s.Value
		case "vcs.time":
			if t, err := time.Parse(time.RFC3339, s.Value); err == nil {
				at = t.UTC().Format("2006-01-02")
			}
		case "vcs.modified":
			dirty = s.Value == "true"
		}
	}
	if rev != "" && v == "devel" {
		if len(rev) > 12 {
			rev = rev[:12]
		}
		v += " " + rev
		if dirty {
			v += "+modified"
		}
		if at != "" {
			v += " (" + at + ")"
		}
	}
	return fmt.Sprintf("%s, %s", v, info.GoVersion)
}

// checkWindow refuses a plot window that is not a positive duration.
func checkWindow(cmdName string, span time.Duration) error {
	if span <= 0 {
		return withCode(2, fmt.Errorf("%s: --window %v: want a positive duration such as 500ms, 2s or 1m", cmdName, span))
	}
	return nil
}
