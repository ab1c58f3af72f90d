package transform

import "errors"

var (
	// ErrDomain is returned by Forward, ForwardSlice and Guerrero for a value outside the
	// transform's domain (x ≤ 0 for log and boxcox, ±Inf for every transform).
	ErrDomain = errors.New("transform: value outside the domain")

	// ErrOverflow is returned by Forward when exp((x − Loc)/Scale) would overflow a float64.
	ErrOverflow = errors.New("transform: exp overflows float64")

	// ErrUnknown is returned by Parse for a name it does not know, and by Forward for a
	// Transform whose Name is not one of the package's names.
	ErrUnknown = errors.New("transform: unknown transform")

	// ErrNoLambda is returned by Forward for a boxcox Transform whose λ has not been chosen
	// (NaN, as Parse("boxcox") leaves it) or is not finite.
	ErrNoLambda = errors.New("transform: boxcox λ not set")

	// ErrTooShort is returned by Guerrero when the series has fewer than two usable subseries.
	ErrTooShort = errors.New("transform: series too short")

	// ErrConstant is returned by Guerrero when the subseries have no variation, so that no λ
	// is better than another.
	ErrConstant = errors.New("transform: series has no variation")

	// ErrBadArgument is returned for an unusable argument other than the data, such as an
	// empty or non-finite λ interval.
	ErrBadArgument = errors.New("transform: bad argument")
)
