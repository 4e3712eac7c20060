package tensor

import (
	"fmt"

	"gonum.org/v1/gonum/mat"
)

// Modes are numbered from 0 in code: mode 0 is x (the first index, size I), mode 1 is y
// (size J) and mode 2 is z (size K). The papers cited in this package number them from 1.

// checkMode panics with a caller-bug message if mode is not 0, 1 or 2.
func checkMode(mode int) {
	if mode < 0 || mode > 2 {
		panic(fmt.Sprintf("tensor: bad mode %d (want 0, 1 or 2)", mode))
	}
}

// Unfold returns the mode-n unfolding (matricization) of t: the matrix whose rows are
// indexed by the mode's index and whose columns run over the other two indices, the
// earlier of them varying fastest, as in Kolda & Bader (SIAM Review 51(3), 2009, §2.4).
// For a tensor of size I×J×K:
//
//	mode 0: I × JK, element (i, j, k) at row i, column j + J·k
//	mode 1: J × IK, element (i, j, k) at row j, column i + I·k
//	mode 2: K × IJ, element (i, j, k) at row k, column i + I·j
//
// The column order does not change the singular values; it is the one that keeps the
// storage order of Dense. If dst is nil a new matrix is allocated; otherwise dst must
// have the unfolding's size and is overwritten. Unfold panics if mode is not 0, 1 or 2.
func Unfold(dst *mat.Dense, t *Dense, mode int) *mat.Dense {
	checkMode(mode)
	rows, cols := unfoldSize(t.Dims(), mode)
	if dst == nil {
		dst = mat.NewDense(rows, cols, nil)
	} else if r, c := dst.Dims(); r != rows || c != cols {
		panic(fmt.Sprintf("tensor: Unfold destination is %d×%d, want %d×%d", r, c, rows, cols))
	}
	raw := dst.RawMatrix()
	I, J, K := t.I, t.J, t.K
	n := 0
	for k := 0; k < K; k++ {
		for j := 0; j < J; j++ {
			for i := 0; i < I; i++ {
				var r, c int
				switch mode {
				case 0:
					r, c = i, j+J*k
				case 1:
					r, c = j, i+I*k
				default:
					r, c = k, i+I*j
				}
				raw.Data[r*raw.Stride+c] = t.Data[n]
				n++
			}
		}
	}
	return dst
}

// unfoldSize returns the size of the mode-n unfolding of a tensor of dimensions d.
func unfoldSize(d [3]int, mode int) (rows, cols int) {
	rows = d[mode]
	cols = 1
	for m := 0; m < 3; m++ {
		if m != mode {
			cols *= d[m]
		}
	}
	return rows, cols
}

// Fold is the inverse of Unfold: it returns the tensor of dimensions dims whose mode-n
// unfolding is m. It panics if m does not have the unfolding's size.
func Fold(m mat.Matrix, mode int, dims [3]int) *Dense {
	checkMode(mode)
	rows, cols := unfoldSize(dims, mode)
	if r, c := m.Dims(); r != rows || c != cols {
		panic(fmt.Sprintf("tensor: Fold of a %d×%d matrix, want %d×%d", r, c, rows, cols))
	}
	t := New(dims[0], dims[1], dims[2])
	I, J, K := dims[0], dims[1], dims[2]
	n := 0
	for k := 0; k < K; k++ {
		for j := 0; j < J; j++ {
			for i := 0; i < I; i++ {
				switch mode {
				case 0:
					t.Data[n] = m.At(i, j+J*k)
				case 1:
					t.Data[n] = m.At(j, i+I*k)
				default:
					t.Data[n] = m.At(k, i+I*j)
				}
				n++
			}
		}
	}
	return t
}

// ModeProduct returns the mode-n product t ×ₙ m (De Lathauwer, De Moor & Vandewalle,
// SIAM J. Matrix Anal. Appl. 21(4), 2000; Kolda & Bader 2009, §2.5): every
// mode-n fibre of t is multiplied by the matrix m, which must have as many columns as t
// has entries along the mode. The result has m's row count along that mode; in unfolded
// form, (t ×ₙ m)₍ₙ₎ = m · t₍ₙ₎. The inputs are not modified. ModeProduct panics if the
// sizes do not match or mode is not 0, 1 or 2.
func ModeProduct(t *Dense, mode int, m mat.Matrix) *Dense {
	checkMode(mode)
	d := t.Dims()
	rows, cols := m.Dims()
	if cols != d[mode] {
		panic(fmt.Sprintf("tensor: ModeProduct of a %d×%d matrix along mode %d of size %d", rows, cols, mode, d[mode]))
	}
	md := mat.DenseCopyOf(m).RawMatrix()
	out := d
	out[mode] = rows
	res := New(out[0], out[1], out[2])
	I, J, K := d[0], d[1], d[2]
	switch mode {
	case 0:
		// Each x-fibre t(:, j, k) is contiguous.
		for jk := 0; jk < J*K; jk++ {
			src := t.Data[jk*I : jk*I+I]
			dst := res.Data[jk*rows : jk*rows+rows]
			for r := 0; r < rows; r++ {
				row := md.Data[r*md.Stride : r*md.Stride+I]
				s := 0.0
				for i, v := range src {
					s += row[i] * v
				}
				dst[r] = s
			}
		}
	case 1:
		// res(:, r, k) = Σ_j m(r, j)·t(:, j, k): whole x-rows at a time.
		for k := 0; k < K; k++ {
			for r := 0; r < rows; r++ {
				dst := res.Data[I*(r+rows*k) : I*(r+rows*k)+I]
				for j := 0; j < J; j++ {
					w := md.Data[r*md.Stride+j]
					if w == 0 {
						continue
					}
					src := t.Data[I*(j+J*k) : I*(j+J*k)+I]
					for i, v := range src {
						dst[i] += w * v
					}
				}
			}
		}
	default:
		// res(:, :, r) = Σ_k m(r, k)·t(:, :, k): whole xy-planes at a time.
		plane := I * J
		for r := 0; r < rows; r++ {
			dst := res.Data[plane*r : plane*r+plane]
			for k := 0; k < K; k++ {
				w := md.Data[r*md.Stride+k]
				if w == 0 {
					continue
				}
				src := t.Data[plane*k : plane*k+plane]
				for i, v := range src {
					dst[i] += w * v
				}
			}
		}
	}
	return res
}

// leading returns the leading r0×r1×r2 block of t (indices below r0, r1 and r2), the
// core of a truncated decomposition. It panics if a size is not between 1 and t's
// dimension.
func leading(t *Dense, r0, r1, r2 int) *Dense {
	if r0 < 1 || r1 < 1 || r2 < 1 || r0 > t.I || r1 > t.J || r2 > t.K {
		panic(fmt.Sprintf("tensor: leading block %d×%d×%d of a %d×%d×%d tensor", r0, r1, r2, t.I, t.J, t.K))
	}
	s := New(r0, r1, r2)
	for k := 0; k < r2; k++ {
		for j := 0; j < r1; j++ {
			copy(s.Data[r0*(j+r1*k):r0*(j+r1*k)+r0], t.Data[t.I*(j+t.J*k):t.I*(j+t.J*k)+r0])
		}
	}
	return s
}
