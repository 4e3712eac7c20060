//go:build tripass_purego

package volume

// axpy sets dst[i] += w·src[i] for every i; len(src) ≥ len(dst). This build uses the
// plain Go loop (see engine_axpy.go for the default).
func axpy(dst, src []float32, w float32) { axpyGeneric(dst, src, w) }
