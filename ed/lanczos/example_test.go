package lanczos_test

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"

	"frustum/ed/lanczos"
)

// chain is the open tight-binding chain H = -sum_j (|j><j+1| + |j+1><j|),
// with eigenvalues -2 cos(pi k/(N+1)), k = 1..N.
type chain struct{ n int }

func (c chain) Dim() int { return c.n }

func (c chain) Apply(_ context.Context, dst, src []float64) error {
	for i := range dst {
		var s float64
		if i > 0 {
			s -= src[i-1]
		}
		if i+1 < c.n {
			s -= src[i+1]
		}
		dst[i] = s
	}
	return nil
}

func ExampleLowest() {
	op := chain{n: 1000}
	res, err := lanczos.Lowest(context.Background(), op, lanczos.Options[float64]{K: 3})
	if err != nil {
		fmt.Println(err)
		return
	}
	for k, v := range res.Values {
		fmt.Printf("%.9f %.9f\n", v, -2*math.Cos(math.Pi*float64(k+1)/1001))
	}
	fmt.Println(res.Converged)
	// Output:
	// -1.999990150 -1.999990150
	// -1.999960601 -1.999960601
	// -1.999911352 -1.999911352
	// true
}

func ExampleThermodynamics() {
	op := chain{n: 400}
	rng := rand.New(rand.NewPCG(1, 2))
	sampler := lanczos.NewSampler[float64](op)
	var samples []*lanczos.Ritz
	for range 10 {
		rz, err := sampler.Sample(context.Background(), lanczos.RandomVector[float64](op.Dim(), rng), 100)
		if err != nil {
			fmt.Println(err)
			return
		}
		samples = append(samples, rz)
	}
	th, err := lanczos.Thermodynamics([]lanczos.SectorSamples{{Dimension: 400, Samples: samples}},
		[]float64{math.Inf(1)}, math.NaN())
	if err != nil {
		fmt.Println(err)
		return
	}
	// At infinite temperature S = ln D exactly, whatever the samples.
	fmt.Printf("S = %.12f, ln 400 = %.12f\n", th.Entropy[0].Value, math.Log(400))
	// Output:
	// S = 5.991464547108, ln 400 = 5.991464547108
}
