// Package wire is eivfit's wire format, shared by the HTTP service and
// the command line: the request and response types, the strict JSON and
// CSV decoders, the JSON encoder, the conversion of eiv/study results into
// responses, and the locating of errors.
//
// The decoders have hand-written fast paths (3 to 8 times faster than
// encoding/json and encoding/csv on typical bodies) that leave to the
// standard library what they do not take (a CSV body with a quoted field,
// JSON that is not a well-formed object); differential fuzz targets
// (FuzzCSVDifferential, FuzzFitJSONDifferential) hold the two paths to the
// same accept/reject decisions, the same numbers and the same error
// places. Decoders answer with a *Problem located in the body (a JSON
// pointer, or a CSV row and column).
//
// The study validates its own options and data and reports a *study.Error
// with a field and an index; Source turns that into the client's terms:
// a JSON pointer for a JSON body, "row N, column C" or "query parameter
// P" for a CSV body, "--flag" for the command line. WriteJSON and Marshal
// refuse a result that is not finite, once, at encoding, as unfittable
// data, so that no NaN ever reaches a client.
//
// Package wire imports neither gin nor package api.
package wire
