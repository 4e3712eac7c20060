package volume

import (
	"fmt"
	"strconv"
	"strings"
)

// Edge says how a filter sees the volume beyond its borders: each out-of-range index
// along an axis is mapped to an index inside, or, for EdgeConstant, to a fill value.
// The extension is applied per axis, so the 3D extension of a volume is the product of
// the three 1D ones, and a kernel larger than the volume folds the index as often as
// needed. The names are the usual signal-processing ones; the table gives SciPy's
// ndimage name of the same extension (its documented "mode" values).
//
//	Edge            extension of a b c d              SciPy ndimage
//	EdgeSymmetric   … c b a | a b c d | d c b …       reflect
//	EdgeReflect     … d c b | a b c d | c b a …       mirror
//	EdgeReplicate   … a a a | a b c d | d d d …       nearest
//	EdgePeriodic    … b c d | a b c d | a b c …       wrap
//	EdgeConstant    … f f f | a b c d | f f f …       constant (f = FilterOptions.Fill)
type Edge int

// The edge extensions. The zero value is EdgeSymmetric, the default.
const (
	// EdgeSymmetric is the half-sample symmetric extension: the border sample is repeated
	// (period 2n).
	EdgeSymmetric Edge = iota
	// EdgeReflect is the whole-sample symmetric extension: the border sample is the mirror
	// (period 2n−2; a 1-sample axis repeats its sample).
	EdgeReflect
	// EdgeReplicate repeats the border sample.
	EdgeReplicate
	// EdgePeriodic wraps around (period n).
	EdgePeriodic
	// EdgeConstant is a constant fill value beyond the border.
	EdgeConstant
)

var edgeNames = [...]string{
	EdgeSymmetric: "symmetric",
	EdgeReflect:   "reflect",
	EdgeReplicate: "replicate",
	EdgePeriodic:  "periodic",
	EdgeConstant:  "constant",
}

// String returns the name used on the command line ("symmetric", "reflect", ...).
func (e Edge) String() string {
	if e >= 0 && int(e) < len(edgeNames) {
		return edgeNames[e]
	}
	return "Edge(" + strconv.Itoa(int(e)) + ")"
}

// Valid reports whether e is one of the extensions above.
func (e Edge) Valid() bool { return e >= EdgeSymmetric && e <= EdgeConstant }

// ParseEdge returns the extension named s: symmetric, reflect, replicate, periodic or
// constant (case-insensitive).
func ParseEdge(s string) (Edge, error) {
	t := strings.ToLower(strings.TrimSpace(s))
	for e, name := range edgeNames {
		if name == t {
			return Edge(e), nil
		}
	}
	return 0, fmt.Errorf("unknown edge %q (want symmetric, reflect, replicate, periodic or constant)", s)
}

// Index maps index i along an axis of n samples (n ≥ 1) to the index inside [0, n)
// whose sample the extension shows at i. It returns ok = false when the extension shows
// the fill value there (EdgeConstant and i out of range). Any i is accepted: the
// symmetric and periodic extensions fold it as often as needed.
func (e Edge) Index(i, n int) (j int, ok bool) {
	if i >= 0 && i < n {
		return i, true
	}
	switch e {
	case EdgeConstant:
		return 0, false
	case EdgeReplicate:
		if i < 0 {
			return 0, true
		}
		return n - 1, true
	case EdgePeriodic:
		i %= n
		if i < 0 {
			i += n
		}
		return i, true
	case EdgeSymmetric:
		p := 2 * n
		i %= p
		if i < 0 {
			i += p
		}
		if i >= n {
			i = p - 1 - i
		}
		return i, true
	case EdgeReflect:
		if n == 1 {
			return 0, true
		}
		p := 2*n - 2
		i %= p
		if i < 0 {
			i += p
		}
		if i >= n {
			i = p - i
		}
		return i, true
	}
	panic("volume: Index on invalid edge " + e.String())
}
