package main

import (
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/santhosh-tekuri/jsonschema/v6"
)

// summarySchema compiles the JSON contract of summary, testdata/summary.schema.json
// (JSON Schema draft 2020-12), with github.com/santhosh-tekuri/jsonschema/v6.
func summarySchema(t *testing.T) *jsonschema.Schema {
	t.Helper()
	c := jsonschema.NewCompiler()
	sch, err := c.Compile(filepath.Join("..", "..", "testdata", "summary.schema.json"))
	if err != nil {
		t.Fatalf("the schema does not compile: %v", err)
	}
	return sch
}

func validate(t *testing.T, sch *jsonschema.Schema, what, doc string) error {
	t.Helper()
	inst, err := jsonschema.UnmarshalJSON(strings.NewReader(doc))
	if err != nil {
		t.Fatalf("%s: not JSON: %v", what, err)
	}
	return sch.Validate(inst)
}

// TestSummarySchema validates every testdata summary against the schema file: the golden
// documents, and summary --json (with advice and gates) and --jsonl over every capture
// in testdata.
func TestSummarySchema(t *testing.T) {
	t.Parallel()
	sch := summarySchema(t)
	goldens, _ := filepath.Glob(filepath.Join("testdata", "summary", "*.json"))
	if len(goldens) == 0 {
		t.Fatal("no golden JSON documents")
	}
	for _, g := range goldens {
		b, err := os.ReadFile(g)
		if err != nil {
			t.Fatal(err)
		}
		if err := validate(t, sch, g, string(b)); err != nil {
			t.Errorf("%s: %v", g, err)
		}
	}
	var files []string
	for _, pat := range []string{"*.txt", "*.cap"} {
		m, _ := filepath.Glob(filepath.Join("..", "..", "testdata", pat))
		files = append(files, m...)
	}
	if len(files) < 5 {
		t.Fatalf("only %d testdata captures", len(files))
	}
	gates := []string{"--max-ripple", "90mV", "--max-settle", "20ms", "--max-jumps", "0", "--max-rejected", "0", "--max-robust-ripple", "1V"}
	// The array of --json over two files; every file once through --jsonl (the same
	// documents, one per line).
	two := []string{capture(t, "three-state-good.txt"), capture(t, "follower-limit.txt")}
	out, errOut, code := runSummaryCmd(t, append(append([]string{"--json"}, gates...), two...)...)
	if code == 2 {
		t.Fatalf("summary --json: exit code 2: %s", errOut)
	}
	if err := validate(t, sch, "array", out); err != nil {
		t.Errorf("summary --json over two files: %v", err)
	}
	out, _, _ = runSummaryCmd(t, append(append([]string{"--jsonl"}, gates...), files...)...)
	lines := strings.Split(strings.TrimRight(out, "\n"), "\n")
	if len(lines) != len(files) {
		t.Fatalf("--jsonl: %d lines for %d files", len(lines), len(files))
	}
	for i, l := range lines {
		if err := validate(t, sch, files[i], l); err != nil {
			t.Errorf("--jsonl %s: %v", files[i], err)
		}
	}
}

// TestSummarySchemaRejects: the schema is a real check: documents that break the
// contract fail it.
func TestSummarySchemaRejects(t *testing.T) {
	t.Parallel()
	sch := summarySchema(t)
	for _, tc := range []struct{ name, from, to string }{
		{"another schema version", `"schema_version": 1`, `"schema_version": 2`},
		{"no schema version", `"schema_version": 1,`, ``},
		{"a figure as text", `re:"tau_charge_s": [0-9.e+-]+`, `"tau_charge_s": "44 ms"`},
		{"a count below zero", `"samples": 6000`, `"samples": -1`},
		{"a reason that is not text", `"samples": 6000,`, `"samples": 6000, "samples_reason": 3,`},
		{"an unknown severity", `"severity": "`, `"severity": "fatal`},
		{"an unknown plant kind", `"kind": "buffer"`, `"kind": "sponge"`},
		{"an interval of three", `"tau_charge_ci_s": [`, `"tau_charge_ci_s": [ 1,`},
	} {
		b, err := os.ReadFile(filepath.Join("testdata", "summary", "follower-limit.json"))
		if err != nil {
			t.Fatal(err)
		}
		good := string(b)
		if !strings.Contains(good, tc.from) {
			b, _ = os.ReadFile(filepath.Join("testdata", "summary", "three-state-good.json"))
			good = string(b)
		}
		if err := validate(t, sch, "golden", good); err != nil {
			t.Fatalf("the golden document itself fails: %v", err)
		}
		if re, ok := strings.CutPrefix(tc.from, "re:"); ok {
			// A figure's value moves with the analysis: the golden's own text.
			if tc.from = regexp.MustCompile(re).FindString(good); tc.from == "" {
				t.Errorf("%s: %s matches nothing in the golden document", tc.name, re)
				continue
			}
		}
		bad := strings.Replace(good, tc.from, tc.to, 1)
		if bad == good {
			t.Errorf("%s: %q is not in the golden document", tc.name, tc.from)
			continue
		}
		if validate(t, sch, tc.name, bad) == nil {
			t.Errorf("%s: the schema accepts it", tc.name)
		}
	}
}
