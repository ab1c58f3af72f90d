package alert

import "errors"

// Errors returned by Evaluator.Probability, NewEvaluator and Rule.Validate.
// Each is wrapped with %w together with the value that caused it.
var (
	// ErrShape is returned when Mean and Variance are empty or differ in length.
	ErrShape = errors.New("alert: mean and variance must be non-empty and of equal length")
	// ErrHorizon is returned when the forecast is longer than the evaluator's maximum horizon.
	ErrHorizon = errors.New("alert: horizon exceeds the evaluator's maximum")
	// ErrWindow is returned when Window is not in 1..len(Mean).
	ErrWindow = errors.New("alert: window must be between 1 and the horizon")
	// ErrDirection is returned when Direction is neither Above nor Below.
	ErrDirection = errors.New("alert: direction must be Above or Below")
	// ErrNotFinite is returned when a mean, a variance or the threshold is NaN or infinite.
	ErrNotFinite = errors.New("alert: value is not finite")
	// ErrNegativeVariance is returned when a marginal variance is negative.
	ErrNegativeVariance = errors.New("alert: variance is negative")
	// ErrNoCovariance is returned when the path probability is needed and no
	// covariance callback was given.
	ErrNoCovariance = errors.New("alert: joint covariance needed but no callback given")
	// ErrNoStateSpace is returned by Decide when a path probability is
	// needed and no state-space system was given.
	ErrNoStateSpace = errors.New("alert: state-space system needed but none given")
	// ErrStateSpace is returned by Decide when the state-space system is
	// malformed, not finite, or disagrees with the query's means or first
	// variance.
	ErrStateSpace = errors.New("alert: state-space system is inconsistent")
	// ErrCovariance is returned when the joint covariance is not finite, not
	// symmetric, or its diagonal disagrees with Variance.
	ErrCovariance = errors.New("alert: joint covariance is inconsistent")
	// ErrNotPSD is returned when the joint covariance is not positive semi-definite.
	ErrNotPSD = errors.New("alert: joint covariance is not positive semi-definite")
	// ErrPaths is returned by NewEvaluator when fewer than MinPaths paths are asked for.
	ErrPaths = errors.New("alert: too few simulation paths for a 1% Monte Carlo error")
	// ErrMaxHorizon is returned by NewEvaluator when the maximum horizon is not positive.
	ErrMaxHorizon = errors.New("alert: maximum horizon must be positive")
	// ErrRule is returned by Rule.Validate when the levels are not 0 < Clear < Raise <= 1.
	ErrRule = errors.New("alert: rule levels must satisfy 0 < clear < raise <= 1")
)
