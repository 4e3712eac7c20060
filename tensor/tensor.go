package tensor

import (
	"fmt"
	"math"
)

// Dense is a dense 3-way tensor of float64 values with dimensions I×J×K. Element
// (i, j, k) is at Data[i + I*(j + J*k)]: the first index varies fastest, as x does in a
// volume. For a kernel, (I, J, K) = (kx, ky, kz) and modes 1, 2, 3 are x, y, z.
type Dense struct {
	I, J, K int
	Data    []float64
}

// New returns a zero I×J×K tensor. It panics if a dimension is not positive.
func New(i, j, k int) *Dense {
	if i <= 0 || j <= 0 || k <= 0 {
		panic(fmt.Sprintf("tensor: bad dimensions %d×%d×%d", i, j, k))
	}
	return &Dense{I: i, J: j, K: k, Data: make([]float64, i*j*k)}
}

// Dims returns the dimensions as an array (the mode-1, mode-2 and mode-3 sizes).
func (t *Dense) Dims() [3]int { return [3]int{t.I, t.J, t.K} }

// At returns element (i, j, k).
func (t *Dense) At(i, j, k int) float64 { return t.Data[i+t.I*(j+t.J*k)] }

// Set sets element (i, j, k) to v.
func (t *Dense) Set(i, j, k int, v float64) { t.Data[i+t.I*(j+t.J*k)] = v }

// Clone returns a deep copy of t.
func (t *Dense) Clone() *Dense {
	c := &Dense{I: t.I, J: t.J, K: t.K, Data: make([]float64, len(t.Data))}
	copy(c.Data, t.Data)
	return c
}

// Norm is the Frobenius norm, the square root of the sum of squared elements.
func (t *Dense) Norm() float64 {
	// Scaled sum of squares, as in LAPACK's dnrm2, so that huge or tiny values do not
	// overflow or underflow.
	scale, ssq := 0.0, 1.0
	for _, v := range t.Data {
		if v == 0 {
			continue
		}
		a := math.Abs(v)
		if scale < a {
			ssq = 1 + ssq*(scale/a)*(scale/a)
			scale = a
		} else {
			ssq += (a / scale) * (a / scale)
		}
	}
	return scale * math.Sqrt(ssq)
}

// NonZero counts the elements that are not zero: the taps a direct convolution needs.
func (t *Dense) NonZero() int {
	n := 0
	for _, v := range t.Data {
		if v != 0 {
			n++
		}
	}
	return n
}

// Outer returns the rank-one tensor w·x∘y∘z, with x along mode 1, y along mode 2 and
// z along mode 3.
func Outer(w float64, x, y, z []float64) *Dense {
	t := New(len(x), len(y), len(z))
	n := 0
	for k := range z {
		for j := range y {
			wyz := w * y[j] * z[k]
			for i := range x {
				t.Data[n] = wyz * x[i]
				n++
			}
		}
	}
	return t
}

// AddScaled sets t = t + a·u. It panics if the dimensions differ.
func (t *Dense) AddScaled(a float64, u *Dense) {
	if t.I != u.I || t.J != u.J || t.K != u.K {
		panic("tensor: AddScaled of tensors of different dimensions")
	}
	for n, v := range u.Data {
		t.Data[n] += a * v
	}
}
