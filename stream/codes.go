package stream

// Reject codes (CONTRACT.md §2): the code of every forewarn.reject message
// and the code label of forewarn_observations_rejected_total. This block is
// the one list of them: ParsePayload sets the first group in Reject.Code,
// the daemon the second, and the daemon's metrics start every code in
// RejectCodes at 0.
const (
	// Set by ParsePayload.
	CodeNotJSON      = "not_json"      // not valid JSON and not a bare number
	CodeNotFinite    = "not_finite"    // NaN, Inf, or a number beyond the float64 range
	CodeBadTime      = "bad_time"      // unparseable time, or too far from arrival
	CodeBadValue     = "bad_value"     // a value of the wrong JSON type, or one a series cannot take
	CodeMissingValue = "missing_value" // an object without "value"
	CodeBadField     = "bad_field"     // an unknown or repeated key
	CodeTooLarge     = "too_large"     // payload over MaxPayload bytes or batch over MaxBatch
	CodeTooDeep      = "too_deep"      // nesting deeper than an object inside an array
	CodeEmpty        = "empty"         // an empty payload or an empty array

	// Set by the daemon.
	CodeBadTopic      = "bad_topic"       // the subject carries no valid topic
	CodeTooManySeries = "too_many_series" // a new topic beyond limits.max_series
	CodeNoSeriesEntry = "no_series_entry" // no series entry of the configuration matches the topic
	CodeBadSettings   = "bad_settings"    // the matching series entry cannot make a series
	CodeLate          = "late"            // an observation for a bucket that has already closed
	CodeOutOfDomain   = "out_of_domain"   // a value the series' transform cannot take
)

// RejectCodes returns every reject code, in the order of the list above.
// Each call returns a new slice.
func RejectCodes() []string {
	return []string{
		CodeNotJSON, CodeNotFinite, CodeBadTime, CodeBadValue, CodeMissingValue,
		CodeBadField, CodeTooLarge, CodeTooDeep, CodeEmpty,
		CodeBadTopic, CodeTooManySeries, CodeNoSeriesEntry, CodeBadSettings,
		CodeLate, CodeOutOfDomain,
	}
}
