package main

import (
	"bytes"
	"os"
	"testing"
)

// demoDataFile is the invented data of the demo.
const demoDataFile = "../../testdata/demo-data.csv"

// TestDemoDataMatchesHiddenModel keeps testdata/demo-data.csv the output of
// makeDemoData (invented data; regenerate with
// go test ./cmd/frustum -run TestDemoDataMatchesHiddenModel -update).
func TestDemoDataMatchesHiddenModel(t *testing.T) {
	want, err := makeDemoData()
	if err != nil {
		t.Fatal(err)
	}
	if *update {
		if err := os.WriteFile(demoDataFile, want, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	got, err := os.ReadFile(demoDataFile)
	if err != nil {
		t.Fatalf("%v (regenerate with go test ./cmd/frustum -run TestDemoDataMatchesHiddenModel -update)", err)
	}
	if !bytes.Equal(got, want) {
		t.Errorf("%s differs from the hidden model's data; regenerate with go test ./cmd/frustum -run TestDemoDataMatchesHiddenModel -update", demoDataFile)
	}
}
