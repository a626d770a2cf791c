package modeldoc

import (
	"bytes"
	"encoding/json"
	"strings"
	"testing"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
	"google.golang.org/protobuf/proto"
)

// FuzzDecode checks that Decode never panics, that its errors carry the
// package's prefix, and that every document it accepts re-encodes to a
// document that decodes to the same model and encodes to the same bytes.
//
// Seeds are whole documents of about a kilobyte, which the fuzzer is slow
// to minimise; run it with a bounded minimisation, e.g.
//
//	go test -run '^$' -fuzz FuzzDecode -fuzztime 60s -fuzzminimizetime 5x ./daemon/modeldoc
func FuzzDecode(f *testing.F) {
	for _, m := range []*mixdv1.Model{pumpModel(), robustModel(), smallModel(1)} {
		b, err := Encode(m)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(b)
		var compact bytes.Buffer
		if err := json.Compact(&compact, b); err != nil {
			f.Fatal(err)
		}
		f.Add(compact.Bytes())
	}
	f.Add([]byte(`{}`))
	f.Add([]byte(`{"format":"mixd-model","format_version":1}`))
	f.Add([]byte(`{"format":"mixd-model","format_version":1,"name":"p","dimension":1,"family":"student_t",` +
		`"covariance_structure":"tied","components":[{"weight":0.5,"mean":[-0],"covariance":[[1e-300]],"degrees_of_freedom":1e308},` +
		`{"weight":0.5,"mean":[5e-324],"covariance":[[1e-300]],"degrees_of_freedom":0.5}],` +
		`"fit_report":{"elapsed_seconds":"1.5","settings":{"\u00e9":""},"training_quantiles":{"levels":[],"log_densities":[]}}}`))
	f.Fuzz(func(t *testing.T, b []byte) {
		m, err := Decode(b)
		if err != nil {
			if m != nil {
				t.Fatalf("Decode returned a model and the error %v", err)
			}
			if !strings.HasPrefix(err.Error(), "model document: ") {
				t.Fatalf("error %q lacks the package prefix", err)
			}
			return
		}
		b2, err := Encode(m)
		if err != nil {
			t.Fatalf("Encode of a decoded model failed: %v\ninput: %q", err, b)
		}
		m2, err := Decode(b2)
		if err != nil {
			t.Fatalf("Decode of a re-encoded model failed: %v\ninput: %q\nre-encoded: %s", err, b, b2)
		}
		if !proto.Equal(m, m2) {
			t.Fatalf("round trip changed the model\nfirst:  %v\nsecond: %v", m, m2)
		}
		b3, err := Encode(m2)
		if err != nil || !bytes.Equal(b2, b3) {
			t.Fatalf("encoding is not stable (%v)\n%s\n%s", err, b2, b3)
		}
	})
}
