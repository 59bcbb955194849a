package wire

import "encoding/json"

// BatchRequest is the body of POST /v1/batch: many named datasets (for
// example every analyte of one study), each a complete fit request.
type BatchRequest struct {
	Datasets []json.RawMessage `json:"datasets"`
}

// BatchEntry is one dataset of a batch: a fit request with a name.
type BatchEntry struct {
	Name string `json:"name,omitempty"`
	FitRequest
}

// BatchResponse holds one result per dataset, in request order. A dataset
// that cannot be fitted has its own problem and does not fail the others.
type BatchResponse struct {
	Results []BatchResult `json:"results"`
	OK      int           `json:"ok"`
	Failed  int           `json:"failed"`
}

// BatchResult is the outcome of one dataset: Fit when Status is 200,
// otherwise Problem.
type BatchResult struct {
	Name   string       `json:"name"`
	Status int          `json:"status"`
	Fit    *FitResponse `json:"fit,omitempty"`
	// Comparison is a method comparison's answer (a CSV split by
	// group_by on /v1/method-comparison).
	Comparison *CompareResponse `json:"comparison,omitempty"`
	Problem    *Problem         `json:"problem,omitempty"`
}
