// Package openapi embeds eivfit's OpenAPI 3 document, the contract of the
// HTTP service. It is served at /openapi.yaml.
package openapi

import _ "embed"

// Spec is the OpenAPI document (YAML).
//
//go:embed openapi.yaml
var Spec []byte
