package main

import (
	"encoding/json"
	"path/filepath"
	"strings"
	"testing"
)

// TestSummaryJSONUnusableEntry: over several files, one that cannot be used gets an
// entry {schema_version, file, error} in the --json array and a line in --jsonl, both
// valid against the schema file; the exit code stays 2.
func TestSummaryJSONUnusableEntry(t *testing.T) {
	t.Parallel()
	sch := summarySchema(t)
	good := capture(t, "three-state-good.txt")
	missing := filepath.Join(t.TempDir(), "gone\x1b]0;x\x07.cap")
	out, stderr, code := runSummaryCmd(t, "--json", "--no-advice", good, missing)
	if code != 2 {
		t.Fatalf("exit %d, want 2; stderr %s", code, stderr)
	}
	if err := validate(t, sch, "array with an unusable file", out); err != nil {
		t.Errorf("schema: %v\n%s", err, out)
	}
	var docs []map[string]any
	if err := json.Unmarshal([]byte(out), &docs); err != nil {
		t.Fatalf("not one JSON array: %v\n%s", err, out)
	}
	if len(docs) != 2 {
		t.Fatalf("%d entries, want 2", len(docs))
	}
	if docs[0]["source"] != good {
		t.Errorf("first entry source %v, want %s", docs[0]["source"], good)
	}
	bad := docs[1]
	wantFile := strings.Replace(missing, "\x1b]0;x\x07", `\x1b]0;x\x07`, 1)
	if bad["schema_version"] != 1.0 || bad["file"] != wantFile || len(bad) != 3 {
		t.Errorf("unusable entry %v, want schema_version 1, file %q, error", bad, wantFile)
	}
	if e, _ := bad["error"].(string); !strings.Contains(e, "no such file") || strings.ContainsRune(e, 0x1b) {
		t.Errorf("error %q: want the reason, sanitised", e)
	}
	if strings.ContainsRune(out, 0x1b) {
		t.Error("a raw ESC reached the JSON")
	}

	out, _, code = runSummaryCmd(t, "--jsonl", "--no-advice", good, missing)
	lines := strings.Split(strings.TrimRight(out, "\n"), "\n")
	if code != 2 || len(lines) != 2 {
		t.Fatalf("--jsonl: exit %d, %d lines; want 2 and 2\n%s", code, len(lines), out)
	}
	for _, l := range lines {
		if err := validate(t, sch, "jsonl line", l); err != nil {
			t.Errorf("--jsonl line %.60s: %v", l, err)
		}
	}

	// The schema holds the entry to its three keys.
	if validate(t, sch, "extra key", `[{"schema_version":1,"file":"a","error":"b","samples":3}]`) == nil {
		t.Error("the schema accepts an unusable entry with an extra key")
	}
	if validate(t, sch, "no error", `[{"schema_version":1,"file":"a"}]`) == nil {
		t.Error("the schema accepts an unusable entry without its error")
	}
}
