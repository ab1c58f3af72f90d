package backtest

import (
	"errors"
	"slices"
	"testing"
)

// Origins K steps apart end at n − h and step back by K (rolling-origin
// evaluation with a fixed stride; Tashman 2000, §3, "non-overlapping" or
// spaced origins): n = 40, h = 5, N = 4, K = 3 gives the training lengths
// 26, 29, 32, 35.
func TestEveryOrigins(t *testing.T) {
	y := make([]float64, 40)
	for i := range y {
		y[i] = float64(i % 7)
	}
	var lengths []int
	f := func(train []float64, h int, levels []float64) (Forecast, error) {
		lengths = append(lengths, len(train))
		fc := Forecast{Mean: make([]float64, h)}
		for range levels {
			fc.Lower, fc.Upper = append(fc.Lower, make([]float64, h)), append(fc.Upper, make([]float64, h))
		}
		return fc, nil
	}
	r, err := Run(y, Options{Horizon: 5, Origins: 4, Every: 3}, f, nil)
	if err != nil {
		t.Fatal(err)
	}
	if want := []int{26, 29, 32, 35}; !slices.Equal(lengths, want) || r.Origins != 4 || r.Errors != 4*5 {
		t.Errorf("training lengths %v, %d origins, %d errors; want %v, 4, 20", lengths, r.Origins, r.Errors, want)
	}
	lengths = nil
	if _, err := Run(y, Options{Horizon: 5, Origins: 3}, f, nil); err != nil || !slices.Equal(lengths, []int{33, 34, 35}) {
		t.Errorf("Every 0 (one step): lengths %v, %v", lengths, err)
	}
	for _, o := range []Options{{Horizon: 5, Origins: 13, Every: 3}, {Horizon: 5, Origins: 2, Every: 40}} {
		if _, err := Run(y, o, f, nil); !errors.Is(err, ErrTooShort) {
			t.Errorf("%+v: %v, want ErrTooShort", o, err)
		}
	}
	if _, err := Run(y, Options{Horizon: 5, Every: -1}, f, nil); !errors.Is(err, ErrBadOptions) {
		t.Errorf("Every −1: %v, want ErrBadOptions", err)
	}
}
