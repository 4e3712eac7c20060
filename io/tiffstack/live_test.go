package tiffstack

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/tripass/tripass/volume"
)

// The Python side of the live check: Debian 12's tifffile (2023.2.3) reads what tripass
// wrote, or libtiff's uncompressed copy of it where tifffile cannot decode (LZW and the
// floating-point predictor need imagecodecs, which Debian lacks), and compares it with
// the expected bytes.
const liveCheckPy = `
import glob, json, os, sys
import numpy as np, tifffile
out = []
for job in json.load(open(sys.argv[1])):
    files = sorted(glob.glob(os.path.join(job["plain"], "*.tif"))) if job["folder"] else [job["plain"]]
    pages = []
    for f in files:
        with tifffile.TiffFile(f) as tf:
            pages += [p.asarray() for p in tf.pages]
    got = np.stack(pages).astype(np.dtype(job["type"]).newbyteorder("<"))
    want = open(job["data"], "rb").read()
    first = sorted(glob.glob(os.path.join(job["file"], "*.tif")))[0] if job["folder"] else job["file"]
    with tifffile.TiffFile(first) as tf:
        p0 = tf.pages[0]
        xres = p0.tags["XResolution"].value if "XResolution" in p0.tags else None
        unit = int(p0.tags["ResolutionUnit"].value) if "ResolutionUnit" in p0.tags else None
        out.append({"file": job["file"], "equal": got.tobytes() == want, "shape": list(got.shape),
                    "desc": p0.description, "xres": xres, "unit": unit, "bigtiff": tf.is_bigtiff,
                    "predictor": int(p0.predictor), "compression": int(p0.compression)})
json.dump(out, sys.stdout)
`

// TestLiveCheck writes stacks in every sample type, compression, predictor and flavour,
// then checks them with outside readers: libtiff's tiffinfo (which decodes every strip
// with -D) and tiffdump must accept them without a word on stderr, and tifffile must
// read back the same voxels, spacing and layout. It needs libtiff-tools and
// python3-tifffile (Debian 12); .ci/run installs them. TRIPASS_LIVE_SEED varies the
// random sizes and values.
func TestLiveCheck(t *testing.T) {
	if testing.Short() {
		t.Skip("live cross-check skipped in -short mode")
	}
	// With TRIPASS_LIVE=1 (as .ci/run sets it) missing tools are a failure, not a skip.
	skip := t.Skipf
	if os.Getenv("TRIPASS_LIVE") == "1" {
		skip = t.Fatalf
	}
	for _, tool := range []string{"tiffinfo", "tiffdump", "tiffcp"} {
		if _, err := exec.LookPath(tool); err != nil {
			skip("%s not found: live libtiff/tifffile cross-check skipped (apt-get install libtiff-tools python3-tifffile); the committed fixtures still test the reader", tool)
		}
	}
	const py = "/usr/bin/python3"
	if err := exec.Command(py, "-c", "import tifffile, numpy").Run(); err != nil {
		skip("%s cannot import tifffile and numpy: live cross-check skipped (apt-get install python3-tifffile)", py)
	}
	seed := uint64(1)
	if s := os.Getenv("TRIPASS_LIVE_SEED"); s != "" {
		seed, _ = strconv.ParseUint(s, 10, 64)
	}
	rng := rand.New(rand.NewPCG(seed, 2))
	dir := t.TempDir()
	type job struct {
		File   string `json:"file"`
		Plain  string `json:"plain"`
		Data   string `json:"data"`
		Type   string `json:"type"`
		Folder bool   `json:"folder"`
		h      volume.Header
		opt    WriteOptions
	}
	var jobs []job
	n := 0
	for _, typ := range volume.SampleTypes {
		for _, comp := range []Compression{None, LZW, Deflate} {
			for _, pred := range []bool{false, true} {
				if pred && comp == None {
					continue
				}
				for _, big := range []bool{false, true} {
					n++
					h := volume.Header{NX: 1 + rng.IntN(90), NY: 1 + rng.IntN(70), NZ: 1 + rng.IntN(4), Type: typ,
						Spacing: [3]float64{0.65, 0.8, 2}, Unit: "um"}
					if n%9 == 0 {
						// Several strips per page, compressed by parallel workers.
						h.NX, h.NY = 700+rng.IntN(50), 300+rng.IntN(50)
					}
					folder := n%5 == 0
					opt := WriteOptions{Compression: comp, Predictor: pred, BigTIFF: big}
					name := fmt.Sprintf("%02d_%s_%s_%v_%v", n, typ, comp, pred, big)
					j := job{File: filepath.Join(dir, name+".tif"), Data: filepath.Join(dir, name+".bin"), Type: typ.String(), Folder: folder, h: h, opt: opt}
					data := makeStack(h)
					var sink volume.Sink
					var err error
					if folder {
						j.File = filepath.Join(dir, name)
						sink, err = CreateFolder(j.File, h, opt)
					} else {
						sink, err = Create(j.File, h, opt)
					}
					if err != nil {
						t.Fatal(err)
					}
					writeStack(t, sink, data)
					var all []byte
					for _, s := range data {
						all = append(all, s.Data...)
					}
					if err := os.WriteFile(j.Data, all, 0o644); err != nil {
						t.Fatal(err)
					}
					j.Plain = j.File
					files := []string{j.File}
					if folder {
						files, _ = filepath.Glob(filepath.Join(j.File, "*.tif"))
						if len(files) != h.NZ {
							t.Fatalf("%s: %d files, want %d", j.File, len(files), h.NZ)
						}
					}
					needPlain := comp == LZW || (pred && typ.IsFloat())
					if needPlain && folder {
						j.Plain = j.File + "_plain"
						os.Mkdir(j.Plain, 0o755)
					}
					for _, f := range files {
						// expected: libtiff 4.5.0 reads and decodes the file silently.
						runQuiet(t, "tiffinfo", "-D", f)
						runQuiet(t, "tiffdump", f)
						if needPlain {
							plain := j.Plain
							if folder {
								plain = filepath.Join(j.Plain, filepath.Base(f))
							} else {
								plain = j.File + "_plain.tif"
								j.Plain = plain
							}
							runQuiet(t, "tiffcp", "-c", "none", f, plain)
						}
					}
					jobs = append(jobs, j)
				}
			}
		}
	}
	list, _ := json.Marshal(jobs)
	lp := filepath.Join(dir, "jobs.json")
	if err := os.WriteFile(lp, list, 0o644); err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(py, "-c", liveCheckPy, lp)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("tifffile check: %v\n%s", err, stderr.String())
	}
	var res []struct {
		File        string
		Equal       bool
		Shape       []int
		Desc        string
		Xres        []uint32
		Unit        *int
		BigTIFF     bool
		Predictor   int
		Compression int
	}
	if err := json.Unmarshal(out, &res); err != nil {
		t.Fatalf("tifffile check output %q: %v", out, err)
	}
	if len(res) != len(jobs) {
		t.Fatalf("tifffile checked %d stacks, want %d", len(res), len(jobs))
	}
	for i, r := range res {
		j := jobs[i]
		name := filepath.Base(j.File)
		// expected: tifffile 2023.2.3 reads the same voxels (NZ, NY, NX).
		if !r.Equal || len(r.Shape) < 2 || r.Shape[len(r.Shape)-1] != j.h.NX {
			t.Errorf("%s: tifffile read shape %v, equal=%v", name, r.Shape, r.Equal)
		}
		// expected: our description, 0.65 µm as pixels per cm (ResolutionUnit 3,
		// TIFF 6.0 Section 8), and the layout asked for, as tifffile reports them.
		if r.Desc != description(j.h) {
			t.Errorf("%s: description %q, want %q", name, r.Desc, description(j.h))
		}
		if len(r.Xres) != 2 || r.Unit == nil || *r.Unit != resUnitCenti || !relClose(1e4/(float64(r.Xres[0])/float64(r.Xres[1])), 0.65, 1e-9) {
			t.Errorf("%s: XResolution %v unit %v, want 1/0.65 µm in pixels per cm", name, r.Xres, r.Unit)
		}
		wantPred := predNone
		if j.opt.Predictor {
			wantPred = predHoriz
			if j.h.Type.IsFloat() {
				wantPred = predFloat
			}
		}
		if r.BigTIFF != j.opt.BigTIFF || r.Predictor != wantPred || r.Compression != int(j.opt.Compression.code()) {
			t.Errorf("%s: tifffile sees bigtiff=%v predictor=%d compression=%d", name, r.BigTIFF, r.Predictor, r.Compression)
		}
	}
	t.Logf("%d stacks checked with tiffinfo -D, tiffdump and tifffile", len(res))
}

// runQuiet runs a libtiff tool and fails on a non-zero exit or any output on stderr
// (libtiff prints its warnings there).
func runQuiet(t *testing.T, name string, args ...string) {
	t.Helper()
	cmd := exec.Command(name, args...)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil || stderr.Len() > 0 || bytes.Contains(bytes.ToLower(out), []byte("warning")) {
		t.Errorf("%s %s: %v\n%s", name, strings.Join(args, " "), err, stderr.String())
	}
}
