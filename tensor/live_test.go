package tensor

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"strconv"
	"testing"
	"time"
)

// TestLiveNumPy cross-checks the HOSVD against NumPy on freshly drawn random tensors:
// shapes from 1 to 12 per axis, some of low multilinear rank, and random truncations.
// It runs only with TRIPASS_LIVE_NUMPY=1 (CI sets it; plain `go test` needs no
// Python). TRIPASS_LIVE_SEED fixes the seed to replay a failure; otherwise it is drawn
// from the clock and logged.
// expected: numpy.linalg.svd of each unfolding and NumPy's truncated HOSVD, NumPy 1.24
// (Debian 12's python3-numpy), via scripts/make_tensor_fixtures.py --stdin.
func TestLiveNumPy(t *testing.T) {
	if os.Getenv("TRIPASS_LIVE_NUMPY") != "1" {
		t.Skip("set TRIPASS_LIVE_NUMPY=1 to cross-check against NumPy")
	}
	seed := uint64(time.Now().UnixNano())
	if s := os.Getenv("TRIPASS_LIVE_SEED"); s != "" {
		v, err := strconv.ParseUint(s, 10, 64)
		if err != nil {
			t.Fatalf("TRIPASS_LIVE_SEED: %v", err)
		}
		seed = v
	}
	t.Logf("seed %d (replay with TRIPASS_LIVE_SEED=%d)", seed, seed)
	rng := rand.New(rand.NewPCG(seed, 1))
	var req numpyFixtures
	for c := range 20 {
		var d [3]int
		for n := range 3 {
			d[n] = 1 + rng.IntN(12)
		}
		a := randomTensor(d[0], d[1], d[2], rng.Uint64())
		if c%3 == 0 {
			// Low multilinear rank: a random 2×2×2 core times random factors.
			core := randomTensor(min(d[0], 2), min(d[1], 2), min(d[2], 2), rng.Uint64())
			a = core
			for n := range 3 {
				f := randomTensor(d[n], core.Dims()[n], 1, rng.Uint64())
				a = ModeProduct(a, n, Unfold(nil, f, 0))
			}
		}
		cs := numpyCase{Name: fmt.Sprintf("case %d %v", c, d), Shape: d, Data: a.Data}
		h, err := HOSVD(a)
		if err != nil {
			t.Fatal(err)
		}
		full := h.Ranks()
		for range 2 {
			var r [3]int
			for n := range 3 {
				r[n] = 1 + rng.IntN(full[n])
			}
			cs.Truncations = append(cs.Truncations, numpyTruncation{Ranks: r})
		}
		req.Cases = append(req.Cases, cs)
	}
	in, err := json.Marshal(req)
	if err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command("/usr/bin/python3", "../scripts/make_tensor_fixtures.py", "--stdin")
	cmd.Stdin = bytes.NewReader(in)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("python3: %v\n%s", err, stderr.String())
	}
	var got numpyFixtures
	if err := json.Unmarshal(out, &got); err != nil {
		t.Fatal(err)
	}
	if len(got.Cases) != len(req.Cases) {
		t.Fatalf("NumPy answered %d cases of %d", len(got.Cases), len(req.Cases))
	}
	checkAgainstNumPy(t, &got)
}
