package nifti

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"testing"

	"github.com/tripass/tripass/volume"
)

// referencePython is Debian's interpreter, which has the reference libraries
// (python3-nibabel, python3-numpy); the one first on PATH may not.
const referencePython = "/usr/bin/python3"

// nibabelScript loads each file with nibabel, writes its data as NumPy sees them
// (little-endian, x fastest) beside it, and prints what nibabel makes of the header.
const nibabelScript = `
import json, sys
import numpy as np
import nibabel as nib
out = {}
for path in json.loads(sys.argv[1]):
    img = nib.load(path)
    h = img.header
    a = np.asanyarray(img.dataobj)
    a.astype(a.dtype.newbyteorder("<")).reshape(-1, order="F").tofile(path + ".data")
    q, qcode = h.get_qform(coded=True)
    s, scode = h.get_sform(coded=True)
    slope, inter = float(img.dataobj.slope), float(img.dataobj.inter)  # the loaded header drops them
    out[path] = dict(
        shape=[int(v) for v in img.shape], dtype=a.dtype.name,
        zooms=[float(v) for v in h.get_zooms()], units=h.get_xyzt_units()[0],
        affine=img.affine.tolist(), qform=h.get_qform().tolist(), sform=h.get_sform().tolist(),
        qform_code=int(qcode), sform_code=int(scode),
        descrip=h["descrip"].item().decode(), slope=slope, inter=inter)
json.dump(out, sys.stdout)
`

type nibabelView struct {
	Shape     []int         `json:"shape"`
	Dtype     string        `json:"dtype"`
	Zooms     []float64     `json:"zooms"`
	Units     string        `json:"units"`
	Affine    [4][4]float64 `json:"affine"`
	Qform     [4][4]float64 `json:"qform"`
	Sform     [4][4]float64 `json:"sform"`
	QformCode int16         `json:"qform_code"`
	SformCode int16         `json:"sform_code"`
	Descrip   string        `json:"descrip"`
	Slope     *float64      `json:"slope"`
	Inter     *float64      `json:"inter"`
}

// randomOrientation is a random placement: a unit quaternion with a ≥ 0 (as nifti1.h
// stores it), either handedness, any offset, a random affine for the sform, and
// random codes.
func randomOrientation(rng *rand.Rand) Orientation {
	var q [4]float64
	n := 0.0
	for i := range q {
		q[i] = rng.NormFloat64()
		n += q[i] * q[i]
	}
	n = math.Sqrt(n)
	if q[0] < 0 {
		n = -n
	}
	o := Orientation{QformCode: int16(1 + rng.IntN(4)), SformCode: int16(rng.IntN(5)), Qfac: 1}
	if rng.IntN(2) == 0 {
		o.Qfac = -1
	}
	for i := 0; i < 3; i++ {
		o.Quatern[i] = float32(q[i+1] / n)
		o.QOffset[i] = float32(rng.NormFloat64() * 100)
		for j := 0; j < 4; j++ {
			o.Srow[i][j] = float32(rng.NormFloat64() * 10)
		}
	}
	return o
}

// TestNibabelReadsWhatWeWrite writes files with tripass and loads them with nibabel,
// comparing data exactly and shape, dtype, spacing, unit, codes, qform and sform
// affines to 1e-6: every sample type, .nii and .nii.gz, the plain orientation with and
// without a unit, a carried orientation (from a nibabel fixture, qform and sform
// different), and random sizes and placements.
// expected: nibabel 5.0 (python3-nibabel, Debian 12) loading the files.
func TestNibabelReadsWhatWeWrite(t *testing.T) {
	if err := exec.Command(referencePython, "-c", "import nibabel").Run(); err != nil {
		t.Skipf("live check skipped: %s with nibabel not available (%v); install python3-nibabel", referencePython, err)
	}
	dir := t.TempDir()
	type written struct {
		h    volume.Header
		o    Orientation
		data []byte
	}
	files := map[string]written{}
	add := func(name string, h volume.Header, orient *Orientation, seed uint64) {
		path := filepath.Join(dir, name)
		src := testVolume(h, seed)
		writeVolume(t, path, h, WriteOptions{Orientation: orient, Description: "cleared tissue block " + name}, src)
		var data []byte
		for _, s := range src {
			data = append(data, s.Data...)
		}
		o := PlainOrientation(h)
		if orient != nil {
			o = *orient
		}
		files[path] = written{h, o, data}
	}
	carried := fixtureOrientation(t)
	for _, typ := range volume.SampleTypes {
		for _, ext := range []string{".nii", ".nii.gz"} {
			h := volume.Header{NX: 9, NY: 6, NZ: 4, Type: typ, Spacing: [3]float64{0.65, 0.65, 2}, Unit: "um"}
			add(fmt.Sprintf("plain-%v%s", typ, ext), h, nil, 1)
			h.Unit, h.Spacing = "", [3]float64{}
			add(fmt.Sprintf("nounit-%v%s", typ, ext), h, nil, 2)
			h.Unit, h.Spacing = "mm", [3]float64{0.9, 0.9, 1.5}
			add(fmt.Sprintf("carried-%v%s", typ, ext), h, &carried, 3)
		}
	}
	rng := rand.New(rand.NewPCG(2026, 12))
	units := []string{"m", "mm", "um", "nm", "cm", ""}
	for i := 0; i < 12; i++ {
		h := volume.Header{NX: 1 + rng.IntN(20), NY: 1 + rng.IntN(20), NZ: 1 + rng.IntN(8),
			Type: volume.SampleTypes[rng.IntN(len(volume.SampleTypes))], Unit: units[rng.IntN(len(units))]}
		for k := range h.Spacing {
			h.Spacing[k] = 0.1 + 3*rng.Float64()
		}
		o := randomOrientation(rng)
		add(fmt.Sprintf("random%d.nii%s", i, []string{"", ".gz"}[i%2]), h, &o, uint64(i))
	}

	var paths []string
	for p := range files {
		paths = append(paths, p)
	}
	arg, _ := json.Marshal(paths)
	cmd := exec.Command(referencePython, "-c", nibabelScript, string(arg))
	cmd.Stderr = os.Stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("nibabel: %v", err)
	}
	var views map[string]nibabelView
	if err := json.Unmarshal(out, &views); err != nil {
		t.Fatal(err)
	}
	wantUnits := map[string]string{"m": "meter", "mm": "mm", "um": "micron", "nm": "micron", "cm": "mm", "": "unknown"}
	for path, w := range files {
		name := filepath.Base(path)
		v, ok := views[path]
		if !ok {
			t.Errorf("%s: nibabel gave nothing", name)
			continue
		}
		h := w.h
		if len(v.Shape) != 3 || v.Shape[0] != h.NX || v.Shape[1] != h.NY || v.Shape[2] != h.NZ {
			t.Errorf("%s: nibabel shape %v, wrote %d×%d×%d", name, v.Shape, h.NX, h.NY, h.NZ)
		}
		if v.Dtype != h.Type.String() {
			t.Errorf("%s: nibabel dtype %s, wrote %v", name, v.Dtype, h.Type)
		}
		if v.Units != wantUnits[h.Unit] {
			t.Errorf("%s: nibabel units %q, wrote %q", name, v.Units, h.Unit)
		}
		sp, _ := spacingInFileUnit(h.Normalize())
		for k := 0; k < 3 && k < len(v.Zooms); k++ {
			if float32(v.Zooms[k]) != float32(sp[k]) {
				t.Errorf("%s: nibabel zooms %v, wrote %v", name, v.Zooms, sp)
				break
			}
		}
		if v.Slope == nil || *v.Slope != 1 || *v.Inter != 0 {
			t.Errorf("%s: nibabel scaling %v %v, want 1 and 0", name, v.Slope, v.Inter)
		}
		if v.Descrip != "cleared tissue block "+name {
			t.Errorf("%s: nibabel descrip %q", name, v.Descrip)
		}
		if v.QformCode != w.o.QformCode || v.SformCode != w.o.SformCode {
			t.Errorf("%s: nibabel codes %d/%d, wrote %d/%d", name, v.QformCode, v.SformCode, w.o.QformCode, w.o.SformCode)
		}
		spacing := [3]float64{float64(float32(sp[0])), float64(float32(sp[1])), float64(float32(sp[2]))}
		if a := w.o.QformAffine(spacing); !affineClose(a, v.Qform, 1e-6) {
			t.Errorf("%s: qform\n nibabel %v\n    ours %v", name, v.Qform, a)
		}
		if a := w.o.SformAffine(); !affineClose(a, v.Sform, 0) {
			t.Errorf("%s: sform\n nibabel %v\n    ours %v", name, v.Sform, a)
		}
		if w.o.QformCode != 0 || w.o.SformCode != 0 {
			if a := w.o.Affine(spacing); !affineClose(a, v.Affine, 1e-6) {
				t.Errorf("%s: affine\n nibabel %v\n    ours %v", name, v.Affine, a)
			}
		}
		data, err := os.ReadFile(path + ".data")
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(data, w.data) {
			t.Errorf("%s: nibabel's data differ from what was written", name)
		}
	}
	t.Logf("%d files checked with nibabel", len(files))
}

// TestWeReadWhatNibabelWrites has nibabel write random volumes (every datatype, both
// byte orders, units, placement codes, scaling chosen by nibabel, extensions, 2D and
// single-volume 4D) with the generator of the committed fixtures, and reads them
// exactly as TestReadNibabelFixtures reads those.
// expected: nibabel 5.0 and NumPy 1.24 (Debian 12), scripts/make_nifti_fixtures.py --random.
func TestWeReadWhatNibabelWrites(t *testing.T) {
	if err := exec.Command(referencePython, "-c", "import nibabel").Run(); err != nil {
		t.Skipf("live check skipped: %s with nibabel not available (%v); install python3-nibabel", referencePython, err)
	}
	dir := t.TempDir()
	seed := fmt.Sprint(rand.Uint32()) // a new draw each run; the seed is logged to repeat it
	t.Logf("seed %s", seed)
	cmd := exec.Command(referencePython, filepath.Join("..", "..", "scripts", "make_nifti_fixtures.py"), "--random", "24", "--seed", seed, dir)
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("generator: %v\n%s", err, out)
	}
	for _, e := range readManifest(t, dir) {
		t.Run(e.File, func(t *testing.T) { checkFixture(t, dir, e) })
	}
}
