package main

import (
	"bytes"
	"flag"
	"fmt"
	"math/rand/v2"
	"os"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

var updateDemo = flag.Bool("update-demo", false, "rewrite the demo's samples file from its seed")

// demoSamples generates the demo's chain-3 errors: 200 draws of a skewed
// error, Gamma(shape 2, scale 0.35 dB) - 0.45 dB, from a fixed seed, in dB
// to two decimals. The data are invented for the demo.
func demoSamples() []byte {
	g := distuv.Gamma{Alpha: 2, Beta: 1 / 0.35, Src: rand.NewPCG(20261201, 3)}
	var buf bytes.Buffer
	buf.WriteString("# chain-3 reading error against the reference meter, dB (invented demo data)\n")
	for i := 0; i < 200; i++ {
		fmt.Fprintf(&buf, "%.2f\n", g.Rand()-0.45)
	}
	return buf.Bytes()
}

// TestDemoSamplesReproducible checks that the shipped samples file is the
// one its seed generates.
func TestDemoSamplesReproducible(t *testing.T) {
	want := demoSamples()
	if *updateDemo {
		if err := os.WriteFile("demo/chain-3-errors.csv", want, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	got, err := os.ReadFile("demo/chain-3-errors.csv")
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got, want) {
		t.Error("demo/chain-3-errors.csv differs from what its seed generates; run go test -run DemoSamples -update-demo")
	}
}
