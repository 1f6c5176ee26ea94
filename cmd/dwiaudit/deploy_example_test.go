package main

import (
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"dwiaudit/config"
	"dwiaudit/rules"
)

// The example configuration shows every threshold, commented out, "with
// the values shipped today"; an operator copies them from there. They
// must be the shipped values (rules.DefaultConfig), or the example
// teaches the wrong numbers.
func TestTheExampleShowsTheShippedThresholds(t *testing.T) {
	path := filepath.Join("..", "..", "deploy", "dwiaudit.example.yaml")
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	// Uncomment the thresholds block only (lines "  #  key: value" from
	// "thresholds: {}" to the next blank line).
	text := string(b)
	start := strings.Index(text, "  thresholds: {}\n")
	if start < 0 {
		t.Fatal("no `thresholds: {}` in the example")
	}
	end := start + strings.Index(text[start:], "\n\n")
	block := strings.Replace(text[start:end], "  thresholds: {}\n", "  thresholds:\n", 1)
	block = strings.ReplaceAll(block, "\n  #  ", "\n    ")
	c, err := config.Parse(path, []byte(text[:start]+block+text[end:]))
	if err != nil {
		t.Fatalf("with the thresholds uncommented: %v", err)
	}
	got, want := c.Audit.RulesConfig().Thresholds, rules.DefaultConfig().Thresholds
	if !reflect.DeepEqual(got, want) {
		t.Errorf("the example's commented thresholds differ from the shipped ones:\n got %+v\nwant %+v", got, want)
	}
}
