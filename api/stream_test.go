package api

import (
	"io"
	"net/http"
	"net/url"
	"strconv"
	"strings"
	"testing"
	"time"

	"eivfit/api/wire"
)

// TestCSVStreamAnswersAsWholeBody: POST /v1/fit with a CSV decoded while
// it arrives answers byte for byte as the same request read whole before
// decoding (the endpoint without streamCSV): valid bodies, faults early
// and late, the row limit, a body over the size limit, options that leave
// the body to the whole read; with the length declared and sent chunked.
func TestCSVStreamAnswersAsWholeBody(t *testing.T) {
	var big strings.Builder
	big.WriteString("x,y,sx,sy\n")
	for i := range 30_000 {
		v := strconv.Itoa(i)
		big.WriteString(v + "," + strconv.Itoa(2*i+i%7) + ",0.5,0." + strconv.Itoa(1+i%9) + "\n")
	}
	long := big.String()
	cases := []struct {
		name, query, body string
		streams           bool // the streaming path takes it
	}{
		{"small", "methods=york,ols", "x,y,sx,sy\n1.2,3.4,0.2,0.2\n1.9,4.4,0.2,0.2\n2.9,7.2,0.2,0.2\n4.0,8.5,0.2,0.4\n", true},
		{"large", "methods=york", long, true},
		{"large with CRLF", "methods=york", strings.ReplaceAll(long, "\n", "\r\n"), true},
		{"fault late", "", long + "1,zz\n", true},
		{"fault early", "", "x,y\n1,2\nq,3\n" + long[10:], true},
		{"row limit", "", long[:strings.LastIndexByte(long[:len(long)/2], '\n')+1] + "# limit\n" + long[10:], true},
		{"quoted cell late", "methods=ols", long + "\"1\",2,0.5,0.5\n", true},
		{"bad query option", "confidence=2", long, true},
		{"bad CSV option", "delimiter=pipe", long, false},
		{"group_by", "group_by=g", "x,y,g\n1,2,a\n", false},
		{"semicolons", "delimiter=semicolon", "x;y\n1;2\n2;3.5\n3;5\n4;8\n", true},
		{"id column", "", "x,y,id\n1,2,a\n2,3,b\n3,5,c\n", true},
		{"header only", "", "x,y\n", true},
		{"empty", "", "", true},
		{"over the size limit", "", long + long, false},
	}
	_, addr := serveTCP(t, Config{MaxBodyBytes: int64(len(long)) * 3 / 2, BodyIdleTimeout: 10 * time.Second})
	limited := Config{BodyIdleTimeout: 10 * time.Second}
	limited.Limits.MaxPoints = 20_000
	_, small := serveTCP(t, limited)
	streamCSV := fitEndpoint.streamCSV
	defer func() { fitEndpoint.streamCSV = streamCSV }()
	streamed := 0
	counting := func(q url.Values, lim *wire.Limits, n int64) (*wire.CSVStream, func() (*wire.FitRequest, error), bool) {
		st, finish, ok := streamCSV(q, lim, n)
		if !ok {
			return st, finish, ok
		}
		return st, func() (*wire.FitRequest, error) {
			streamed++
			return finish()
		}, ok
	}
	post := func(host, query, body string, chunked bool) (int, string, string) {
		var r io.Reader = strings.NewReader(body)
		if chunked {
			r = io.MultiReader(r) // no length: sent chunked
		}
		resp, err := http.Post("http://"+host+"/v1/fit?"+query, "text/csv", r)
		if err != nil {
			t.Fatal(err)
		}
		defer resp.Body.Close()
		b, _ := io.ReadAll(resp.Body)
		return resp.StatusCode, resp.Header.Get("Content-Type"), string(b)
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			host := addr
			if c.name == "row limit" {
				host = small // 45,000 rows, 20,000 allowed
			}
			for _, chunked := range []bool{false, true} {
				fitEndpoint.streamCSV = nil
				wantCode, wantType, want := post(host, c.query, c.body, chunked)
				fitEndpoint.streamCSV = counting
				before := streamed
				code, ctype, got := post(host, c.query, c.body, chunked)
				if code != wantCode || ctype != wantType || got != want {
					t.Fatalf("chunked %v: streamed %d %s %.300s; read whole %d %s %.300s", chunked, code, ctype, got, wantCode, wantType, want)
				}
				if c.streams && streamed == before {
					t.Fatalf("chunked %v: the body was not streamed", chunked)
				}
				if code == 0 || (strings.HasPrefix(c.name, "over") || c.name == "row limit") && code != http.StatusRequestEntityTooLarge {
					t.Fatalf("status %d", code)
				}
			}
		})
	}
}

// A streamed CSV body that stalls inside a number is answered 408 like
// any body, and leaves neither budget nor slot held.
func TestCSVStreamStalled408(t *testing.T) {
	srv, addr := serveTCP(t, Config{BodyIdleTimeout: 300 * time.Millisecond, Slots: 1})
	status, body, _ := rawRequest(t, addr, "POST /v1/fit HTTP/1.1\r\nHost: x\r\nContent-Type: text/csv\r\nContent-Length: 1000\r\n\r\nx,y\n1,2\n3,4", 5*time.Second)
	if !strings.HasPrefix(status, "408") || !strings.Contains(body, "body-timeout") {
		t.Errorf("answer %q %s, want 408 body-timeout", status, body)
	}
	if len(srv.slots) != 0 || srv.intake.available() != srv.intake.cap {
		t.Errorf("slots %d, body budget %d of %d free after the timeout", len(srv.slots), srv.intake.available(), srv.intake.cap)
	}
}
