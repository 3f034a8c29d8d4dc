// Householder reduction of a general complex matrix to upper Hessenberg form (the first step of
// modes/complex_eigenvalues), on real and imaginary parts side by side.
//
// For column i, the reflector H = I - tau v v^H (v = [1; essential]) that maps the column below
// the diagonal onto [beta; 0 ..] (LAPACK's zlarfg form, beta real) is applied as A <- H^H A H:
// from the left to the trailing rows (w = A22^H v, the reflection row by row) and from the right
// to every row (w = A v, then column by column).
//
// Bit for bit the matrix Eigen 3.4's HessenbergDecomposition(a).matrixH() gives on the baseline
// x86-64 build (SSE2, no FMA): the same reflectors, each sum over the same terms in the same
// order, each complex product as Eigen's packet product forms it (re = ar br - ai bi, im = ar bi +
// ai br), each quotient by (c0 - beta) as its packet quotient (a conj(b) over |b|^2).
#pragma once

#include <cstddef>
#include <span>

namespace wane {

/// Reduces the n x n complex matrix (column-major real parts re, imaginary parts im, n * n each)
/// in place to upper Hessenberg form, entries below the subdiagonal set to 0.
void reduce_to_hessenberg(std::span<double> re, std::span<double> im, std::size_t n);

}  // namespace wane
