package main

import (
	"bytes"
	"encoding/json"
	"flag"
	"fmt"
	"os"
	"strings"
	"testing"

	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	"frustum/cluster"
)

var update = flag.Bool("update", false, "rewrite testdata/demo-multimer.json from the demo builder")

const demoFile = "../../testdata/demo-multimer.json"

// TestDemoFileMatchesBuilder checks that testdata/demo-multimer.json is the
// demo's cluster. Regenerate it with
//
//	go test ./cmd/frustum -run TestDemoFileMatchesBuilder -update
func TestDemoFileMatchesBuilder(t *testing.T) {
	want := demoModel()
	if *update {
		b, err := compactCluster(want)
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(demoFile, b, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	got, err := cluster.LoadFile(demoFile)
	if err != nil {
		t.Fatalf("%v (regenerate with go test ./cmd/frustum -run TestDemoFileMatchesBuilder -update)", err)
	}
	if !got.Equal(want) {
		t.Errorf("%s differs from cluster.DefectMultimer(demoParams); regenerate with go test ./cmd/frustum -run TestDemoFileMatchesBuilder -update", demoFile)
	}
	if !strings.Contains(got.Name, "invented") {
		t.Errorf("demo cluster name %q does not say it is invented", got.Name)
	}
}

// compactCluster writes a cluster file in the style of FORMAT.md: one site,
// bond or symmetry per line.
func compactCluster(m *cluster.Model) ([]byte, error) {
	c := m.ToProto()
	line := func(msg proto.Message) (string, error) {
		b, err := protojson.Marshal(msg)
		if err != nil {
			return "", err
		}
		var out bytes.Buffer
		if err := json.Compact(&out, b); err != nil {
			return "", err
		}
		return spaced(out.String()), nil
	}
	var b strings.Builder
	name, _ := json.Marshal(c.GetName())
	fmt.Fprintf(&b, "{\n  \"name\": %s,\n", name)
	section := func(key string, n int, item func(i int) proto.Message, last bool) error {
		fmt.Fprintf(&b, "  %q: [\n", key)
		for i := range n {
			s, err := line(item(i))
			if err != nil {
				return err
			}
			sep := ","
			if i == n-1 {
				sep = ""
			}
			fmt.Fprintf(&b, "    %s%s\n", s, sep)
		}
		if last {
			b.WriteString("  ]\n")
		} else {
			b.WriteString("  ],\n")
		}
		return nil
	}
	if err := section("sites", len(c.GetSites()), func(i int) proto.Message { return c.GetSites()[i] }, false); err != nil {
		return nil, err
	}
	if err := section("bonds", len(c.GetBonds()), func(i int) proto.Message { return c.GetBonds()[i] }, len(c.GetSymmetries()) == 0); err != nil {
		return nil, err
	}
	if len(c.GetSymmetries()) > 0 {
		if err := section("symmetries", len(c.GetSymmetries()), func(i int) proto.Message { return c.GetSymmetries()[i] }, true); err != nil {
			return nil, err
		}
	}
	b.WriteString("}\n")
	return []byte(b.String()), nil
}

// spaced puts a space after every ':' and ',' of compact JSON outside strings.
func spaced(s string) string {
	var b strings.Builder
	inString, escaped := false, false
	for _, r := range s {
		b.WriteRune(r)
		switch {
		case escaped:
			escaped = false
		case inString && r == '\\':
			escaped = true
		case r == '"':
			inString = !inString
		case !inString && (r == ':' || r == ','):
			b.WriteByte(' ')
		}
	}
	return b.String()
}
