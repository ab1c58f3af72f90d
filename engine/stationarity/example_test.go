package stationarity_test

import (
	"fmt"
	"math/rand/v2"

	"forewarn/engine/stationarity"
)

// A random walk has a unit root: the ADF statistic stays above the 5 % critical value. Its
// first difference, white noise, is far below it.
func ExampleADF() {
	rng := rand.New(rand.NewPCG(1, 2))
	steps := make([]float64, 200)
	walk := make([]float64, len(steps)+1)
	for i := range steps {
		steps[i] = rng.NormFloat64()
		walk[i+1] = walk[i] + steps[i]
	}
	for _, c := range []struct {
		name string
		x    []float64
	}{{"walk", walk}, {"steps", steps}} {
		res, err := stationarity.ADF(c.x, 1, stationarity.Constant)
		if err != nil {
			fmt.Println(err)
			return
		}
		fmt.Printf("%s: τ = %.2f, 5%% critical %.3f, p %.3f, unit root rejected: %v\n",
			c.name, res.Stat, res.Crit5, res.PValue, res.PValue < 0.05)
	}
	// Output:
	// walk: τ = -0.55, 5% critical -2.876, p 0.882, unit root rejected: false
	// steps: τ = -11.73, 5% critical -2.876, p 0.000, unit root rejected: true
}
