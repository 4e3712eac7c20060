package volume

import "math"

// The engine's inner loops. Every pass of the engine is a sequence of these on flat
// float32 slices: the x pass as shifted views of padded rows, the y pass row-wise, the z
// pass slice-wise. Each output value receives its taps in a fixed order whatever the
// block it lies in, so the result does not depend on the number of threads.

// axpyGeneric sets dst[i] += w·src[i] for every i. len(src) ≥ len(dst).
// It is the plain-Go reference that the assembly variant is checked against.
func axpyGeneric(dst, src []float32, w float32) {
	src = src[:len(dst)]
	i := 0
	for ; i+4 <= len(dst); i += 4 {
		d := dst[i : i+4 : i+4]
		s := src[i : i+4 : i+4]
		d[0] += w * s[0]
		d[1] += w * s[1]
		d[2] += w * s[2]
		d[3] += w * s[3]
	}
	for ; i < len(dst); i++ {
		dst[i] += w * src[i]
	}
}

// addConst sets dst[i] += c for every i.
func addConst(dst []float32, c float32) {
	for i := range dst {
		dst[i] += c
	}
}

// magnitudeStep folds one plan's output src into the gradient magnitude dst:
// dst = src² for the first plan, dst += src² for the next, and the square root is taken
// with the last addition. The values equal summing the squares into zeros and taking
// the root afterwards; the passes over dst are fewer.
func magnitudeStep(dst, src []float32, first, last bool) {
	src = src[:len(dst)]
	switch {
	case first && last:
		for i, v := range src {
			dst[i] = float32(math.Sqrt(float64(v * v)))
		}
	case first:
		for i, v := range src {
			dst[i] = v * v
		}
	case last:
		for i, v := range src {
			dst[i] = float32(math.Sqrt(float64(dst[i] + v*v)))
		}
	default:
		for i, v := range src {
			dst[i] += v * v
		}
	}
}

// addTo64 sets acc[i] += src[i] for every i, in float64.
func addTo64(acc []float64, src []float32) {
	src = src[:len(acc)]
	i := 0
	for ; i+4 <= len(acc); i += 4 {
		a := acc[i : i+4 : i+4]
		s := src[i : i+4 : i+4]
		a[0] += float64(s[0])
		a[1] += float64(s[1])
		a[2] += float64(s[2])
		a[3] += float64(s[3])
	}
	for ; i < len(acc); i++ {
		acc[i] += float64(src[i])
	}
}
