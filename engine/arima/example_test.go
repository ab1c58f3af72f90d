package arima_test

import (
	"fmt"
	"math"

	"forewarn/engine/arima"
)

// The series is R's datasets::lh (48 luteinizing hormone samples, Diggle
// 1990); R 4.2.2 arima(lh, order = c(1,0,0)) gives ar1 0.5739, intercept
// 2.4133, sigma^2 0.1975, log likelihood -29.38, aic 64.76.
var lh = []float64{2.4, 2.4, 2.4, 2.2, 2.1, 1.5, 2.3, 2.3, 2.5, 2.0, 1.9, 1.7, 2.2, 1.8,
	3.2, 3.2, 2.7, 2.2, 2.2, 1.9, 1.9, 1.8, 2.7, 3.0, 2.3, 2.0, 2.0, 2.9, 2.9, 2.7,
	2.7, 2.3, 2.6, 2.4, 1.8, 1.7, 1.5, 1.4, 2.1, 3.3, 3.5, 3.5, 3.1, 2.6, 2.1, 3.4, 3.0, 2.9}

func ExampleFit() {
	spec, err := arima.NewSpec([3]int{1, 0, 0}, [3]int{}, 0, arima.ConstantAuto)
	if err != nil {
		panic(err)
	}
	res, err := arima.Fit(lh, spec, nil)
	if err != nil {
		panic(err)
	}
	m := res.Model
	fmt.Printf("%s: ar1 %.4f mean %.4f sigma2 %.4f\n", spec, m.AR[0], m.Mean, m.Sigma2)
	fmt.Printf("loglik %.2f aic %.2f nobs %d\n", res.LogLik, res.AIC, res.NObs)
	// Output:
	// ARIMA 1,0,0 + mean: ar1 0.5739 mean 2.4133 sigma2 0.1975
	// loglik -29.38 aic 64.76 nobs 48
}

func ExampleFilter() {
	res, err := arima.Fit(lh, arima.Spec{P: 1, Mean: true}, nil)
	if err != nil {
		panic(err)
	}
	f, err := arima.NewFilter(res.Model, 3)
	if err != nil {
		panic(err)
	}
	f.Steps(lh)
	mean, variance := make([]float64, 3), make([]float64, 3)
	f.Forecast(mean, variance)
	for h := range mean {
		fmt.Printf("h=%d %.4f ± %.4f\n", h+1, mean[h], math.Sqrt(variance[h]))
	}
	// R 4.2.2 predict(arima(lh, order = c(1,0,0)), n.ahead = 3):
	// 2.6926 2.5736 2.5053, se 0.4444 0.5124 0.5329.

	// Output:
	// h=1 2.6926 ± 0.4444
	// h=2 2.5736 ± 0.5124
	// h=3 2.5053 ± 0.5329
}

// The orders as written in configuration (model: "0,1,1 x 0,1,1") and a
// period from the seasons give the airline model of Box & Jenkins (1976,
// ch. 9), with no constant as its d+D = 2 leaves none.
func ExampleParseOrders() {
	ord, sord, seasonal, err := arima.ParseOrders("0,1,1 x 0,1,1")
	if err != nil {
		panic(err)
	}
	s, err := arima.NewSpec(ord, sord, 12, arima.ConstantAuto)
	if err != nil {
		panic(err)
	}
	fmt.Println(seasonal, s.Label(), s.Orders(), s.ConstantName(), s.NumParams())
	_, err = arima.NewSpec([3]int{1, 1, 0}, [3]int{}, 0, arima.ConstantMean)
	fmt.Println(err)
	// Output:
	// true ARIMA 0,1,1 × 0,1,1 s=12 0,1,1 x 0,1,1 none 2
	// arima: invalid model specification: mean: a mean is only estimated when d+D = 0, here d+D = 1
}
