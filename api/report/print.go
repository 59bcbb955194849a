package report

// PrintMark is what the margin of every printed page names the report by:
// the input's SHA-256 from the report's lines about itself ("-" when it has
// none).
func (p *Page) PrintMark() string {
	for _, kv := range p.Meta {
		if kv.Key == "Input SHA-256" {
			return kv.Value
		}
	}
	return "-"
}
