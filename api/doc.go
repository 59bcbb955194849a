// Package api is eivfit's HTTP service, and only that: the server and its
// middleware (request ids, logging without request data, recovery, API
// keys, Accept negotiation, refusal of content-coded bodies), the limits
// (body size, the memory budget of bodies being read, compute slots, the
// request deadline), metrics, and one file per endpoint.
//
// Every analysis endpoint (POST /v1/fit, /v1/method-comparison, the
// plots, the report form) runs one flow, analyse: decode the body (JSON,
// or CSV with the options in the query) with api/wire, compute with
// eiv/study in a compute slot under the deadline (the study validates its
// input first), and encode with api/wire, which refuses a number that is
// not finite. Every error becomes an RFC 9457 problem in one place,
// problemFor, which maps a study error's kind to its status (invalid 400,
// unfittable 422, too large 413) after wire.Source has named the place in
// the client's terms. The CLI calls the same wire, study and report
// functions, so its output is byte for byte the service's.
package api
