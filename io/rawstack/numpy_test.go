package rawstack

import (
	"encoding/json"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"testing"

	"github.com/tripass/tripass/volume"
)

// referencePython is Debian's interpreter, which has the reference libraries
// (python3-numpy); the one first on PATH may not.
const referencePython = "/usr/bin/python3"

// numpyDtype is NumPy's name for each sample type, without the byte order character.
var numpyDtype = map[volume.SampleType]string{
	volume.Uint8: "u1", volume.Uint16: "u2", volume.Int16: "i2", volume.Uint32: "u4",
	volume.Int32: "i4", volume.Float32: "f4", volume.Float64: "f8",
}

// TestNumPyReadsWhatWeWrite has NumPy read the files tripass writes, in every sample
// type and both byte orders, and compares every value exactly.
// expected: numpy.fromfile with explicit '<'/'>' dtypes, NumPy 1.24 (Debian 12).
func TestNumPyReadsWhatWeWrite(t *testing.T) {
	if err := exec.Command(referencePython, "-c", "import numpy").Run(); err != nil {
		t.Skipf("live check skipped: %s with numpy not available (%v); install python3-numpy", referencePython, err)
	}
	dir := t.TempDir()
	type job struct {
		Path  string `json:"path"`
		Dtype string `json:"dtype"`
	}
	var jobs []job
	want := map[string][]float64{}
	for _, typ := range volume.SampleTypes {
		for _, o := range orders {
			h := header(typ)
			values := sampleValues(typ, int(h.Voxels()), 11)
			path := filepath.Join(dir, typ.String()+"-"+o.name+".raw")
			w, err := Create(path, h, o.order, false)
			if err != nil {
				t.Fatal(err)
			}
			for _, s := range slices(h, values) {
				if err := w.WriteSlice(s); err != nil {
					t.Fatal(err)
				}
			}
			if err := w.Close(); err != nil {
				t.Fatal(err)
			}
			bo := "<"
			if o.name == "be" {
				bo = ">"
			}
			jobs = append(jobs, job{path, bo + numpyDtype[typ]})
			want[path] = values
		}
	}
	spec, _ := json.Marshal(jobs)
	// float.hex keeps every value exact, NaN and infinities included.
	script := `
import json, sys
import numpy as np
out = {}
for j in json.loads(sys.argv[1]):
    a = np.fromfile(j["path"], dtype=np.dtype(j["dtype"]))
    out[j["path"]] = [float(x).hex() for x in a.astype(np.float64)]
json.dump(out, sys.stdout)
`
	cmd := exec.Command(referencePython, "-c", script, string(spec))
	cmd.Stderr = os.Stderr
	b, err := cmd.Output()
	if err != nil {
		t.Fatalf("numpy: %v", err)
	}
	var got map[string][]string
	if err := json.Unmarshal(b, &got); err != nil {
		t.Fatal(err)
	}
	for path, values := range want {
		g := got[path]
		if len(g) != len(values) {
			t.Errorf("%s: numpy read %d values, want %d", filepath.Base(path), len(g), len(values))
			continue
		}
		for i, v := range values {
			x, err := strconv.ParseFloat(pyHex(g[i]), 64)
			if err != nil {
				t.Fatalf("%s: value %q: %v", filepath.Base(path), g[i], err)
			}
			if x != v && !(x != x && v != v) {
				t.Errorf("%s: value %d: numpy %g, wrote %g", filepath.Base(path), i, x, v)
				break
			}
		}
	}
}

// pyHex turns Python's float.hex spellings of the special values into Go's.
func pyHex(s string) string {
	switch s {
	case "inf":
		return "+Inf"
	case "-inf":
		return "-Inf"
	case "nan":
		return "NaN"
	}
	return s
}
