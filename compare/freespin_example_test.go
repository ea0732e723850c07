package compare_test

import (
	"fmt"

	"frustum/compare"
)

// A free spin 1/2 with g = 2 at 2 K: its polarization M/M_sat is tanh x with
// x = g mu_B B / (2 k_B T), so doubling field and temperature together
// changes nothing.
func ExampleFreeSpin_Polarization() {
	f := compare.FreeSpin{S: 0.5, G: 2}
	fmt.Println(f.Name())
	for _, B := range []float64{0, 1, 2, 5, 10} {
		fmt.Printf("B = %2g T: x = %.4f, M/M_sat = %.4f\n", B, compare.ScalingVariable(f.G, B, 2), f.Polarization(B, 2))
	}
	fmt.Printf("B = 10 T at 4 K: M/M_sat = %.4f\n", f.Polarization(10, 4))
	// Output:
	// free spin 1/2
	// B =  0 T: x = 0.0000, M/M_sat = 0.0000
	// B =  1 T: x = 0.3359, M/M_sat = 0.3238
	// B =  2 T: x = 0.6717, M/M_sat = 0.5861
	// B =  5 T: x = 1.6793, M/M_sat = 0.9328
	// B = 10 T: x = 3.3586, M/M_sat = 0.9976
	// B = 10 T at 4 K: M/M_sat = 0.9328
}
