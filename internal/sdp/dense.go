package sdp

import (
	"math"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/lapack/lapack64"
)

// The dense operations on one diagonal block. Every symmetric matrix of a
// block is stored in full (both triangles, row-major n×n, stride n), so
// that the products of the search direction are plain general matrix
// products on the raw data (the tile kernel, or gonum's Dgemm) and inner
// products are loops over one slice. Cholesky factors use the upper
// triangle only (gonum's Dpotrf), their inverses (Dtrtri) are stored with
// a zero lower triangle.

// general views an n×n row-major slice as a blas64.General.
func general(n int, a []float64) blas64.General {
	return blas64.General{Rows: n, Cols: n, Stride: n, Data: a}
}

// upper views the upper triangle of an n×n row-major slice as a triangular
// matrix.
func upper(n int, a []float64) blas64.Triangular {
	return blas64.Triangular{Uplo: blas.Upper, Diag: blas.NonUnit, N: n, Stride: n, Data: a}
}

// product holds the packed operands of the n×n products of one block
// (see gemm).
type product struct {
	ap, bp []float64
}

// gemm sets c = op(a)·op(b) for n×n row-major matrices, op(m) = mᵀ when
// the matching flag is set; c must be distinct from a and b. With the tile
// kernel, op(a) is packed negated in strips of 4 rows and op(b) in strips
// of 12 columns (tiles.go), and each tile of c, set to zero, loses the
// product of its strips: c = 0 − (−op(a))·op(b), exactly op(a)·op(b) as
// the kernel computes it. Without the kernel, gonum's Dgemm.
func (pr *product) gemm(n int, ta bool, a []float64, tb bool, b, c []float64) {
	if !useKernels {
		tA, tB := blas.NoTrans, blas.NoTrans
		if ta {
			tA = blas.Trans
		}
		if tb {
			tB = blas.Trans
		}
		blas64.Gemm(tA, tB, 1, general(n, a), general(n, b), 0, general(n, c))
		return
	}
	nsA, nsB := (n+tileRows-1)/tileRows, (n+tileCols-1)/tileCols
	if len(pr.ap) < nsA*tileRows*n {
		pr.ap = make([]float64, nsA*tileRows*n)
		pr.bp = make([]float64, nsB*tileCols*n)
	}
	ap, bp := pr.ap, pr.bp
	// ap[(s·n + l)·4 + i] = −op(a)[4s+i][l], bp[(s·n + l)·12 + j] = op(b)[l][12s+j].
	for r := 0; r < nsA*tileRows; r++ {
		s, i := r/tileRows, r%tileRows
		dst := ap[s*n*tileRows+i:]
		switch {
		case r >= n:
			for l := 0; l < n; l++ {
				dst[l*tileRows] = 0
			}
		case ta:
			for l := 0; l < n; l++ {
				dst[l*tileRows] = -a[l*n+r]
			}
		default:
			for l, v := range a[r*n : (r+1)*n] {
				dst[l*tileRows] = -v
			}
		}
	}
	for s := 0; s < nsB; s++ {
		w := min(tileCols, n-s*tileCols)
		for l := 0; l < n; l++ {
			dst := bp[(s*n+l)*tileCols : (s*n+l+1)*tileCols]
			if tb {
				for j := 0; j < w; j++ {
					dst[j] = b[(s*tileCols+j)*n+l]
				}
			} else {
				copy(dst, b[l*n+s*tileCols:l*n+s*tileCols+w])
			}
			clear(dst[w:])
		}
	}
	clear(c[:n*n])
	var tmp [tileRows * tileCols]float64
	for rs := 0; rs < nsA; rs++ {
		h := min(tileRows, n-rs*tileRows)
		for cs := 0; cs < nsB; cs++ {
			w := min(tileCols, n-cs*tileCols)
			cc := c[rs*tileRows*n+cs*tileCols:]
			if h == tileRows && w == tileCols {
				kernel(n, ap[rs*n*tileRows:], bp[cs*n*tileCols:], cc, n)
			} else {
				kernelEdge(n, ap[rs*n*tileRows:], bp[cs*n*tileCols:], cc, n, h, w, &tmp)
			}
		}
	}
}

// symPart sets dst = (t + tᵀ)/2; dst may be t.
func symPart(n int, dst, t []float64) {
	for i := 0; i < n; i++ {
		dst[i*n+i] = t[i*n+i]
		for j := i + 1; j < n; j++ {
			v := (t[i*n+j] + t[j*n+i]) / 2
			dst[i*n+j], dst[j*n+i] = v, v
		}
	}
}

// mulSym3 sets dst to the symmetric part of a·b·c, using t1 and t2 (n×n,
// distinct from the others) as scratch.
func (pr *product) mulSym3(n int, dst, a, b, c, t1, t2 []float64) {
	pr.gemm(n, false, a, false, b, t1)
	pr.gemm(n, false, t1, false, c, t2)
	symPart(n, dst, t2)
}

// dot returns Σ_ij a_ij b_ij, which is tr(a·b) for symmetric a or b.
func dot(a, b []float64) float64 {
	var t float64
	for i, v := range a {
		t += v * b[i]
	}
	return t
}

// frob2 returns Σ_ij a_ij².
func frob2(a []float64) float64 { return dot(a, a) }

// factorUpper sets u to the upper Cholesky factor U of the symmetric s
// (s = UᵀU, only u's upper triangle meaningful) and reports whether s is
// numerically positive definite.
func factorUpper(n int, s, u []float64) bool {
	copy(u, s)
	_, ok := lapack64.Potrf(blas64.Symmetric{Uplo: blas.Upper, N: n, Stride: n, Data: u})
	return ok
}

// inverseFactor sets v = U⁻¹ (upper triangular, its strictly lower part
// zero) from the upper factor u (v may be u).
func inverseFactor(n int, u, v []float64) bool {
	copy(v, u)
	for i := 0; i < n; i++ {
		clear(v[i*n : i*n+i])
	}
	return lapack64.Trtri(upper(n, v))
}

// noStep marks a block along whose direction no positive step could be
// computed (its factor or the eigenvalue computation failed).
const noStep = math.MaxFloat64

// stepTop returns λmax(−U⁻ᵀDU⁻¹) for S = UᵀU ≻ 0 given by V = U⁻¹ (upper
// triangular), and noStep when ok is false (S not positive definite) or
// the eigenvalue computation fails. S + αD ⪰ 0 ⇔ I + αU⁻ᵀDU⁻¹ ⪰ 0
// (congruence by U⁻ᵀ, Sylvester's law of inertia) ⇔ α·λmax(−U⁻ᵀDU⁻¹) ≤ 1,
// so the largest step is the reciprocal of the returned value when it is
// positive. t1 and t2 are n×n scratch.
//
// VᵀDV is formed by two products, symmetrised and negated, and its largest
// eigenvalue computed by maxEigSym (Householder tridiagonalisation and
// bisection, eigtop.go).
func (pr *product) stepTop(n int, v []float64, ok bool, d, t1, t2 []float64) float64 {
	if !ok {
		return noStep
	}
	pr.gemm(n, false, d, false, v, t1) // DV
	pr.gemm(n, true, v, false, t1, t2) // VᵀDV
	for i := 0; i < n; i++ {
		t2[i*n+i] = -t2[i*n+i]
		for j := i + 1; j < n; j++ {
			s := -(t2[i*n+j] + t2[j*n+i]) / 2
			t2[i*n+j], t2[j*n+i] = s, s
		}
	}
	top, eok := maxEigSym(n, t2, t1)
	if !eok {
		return noStep
	}
	return top
}

// stepFromTop turns the largest of the blocks' stepTop values into the
// largest step α with S + αD ⪰ 0 on every block: 0 when a block failed,
// 10⁶ when no eigenvalue exceeds 10⁻¹² (the direction stays inside the
// cone), else 1/top.
func stepFromTop(top float64) float64 {
	switch {
	case top == noStep:
		return 0
	case top <= 1e-12:
		return 1e6
	}
	return 1 / top
}
