// The few distribution functions the confidence intervals and the homogeneity
// test need. No statistics library is linked into longrun, so these are small
// published approximations, each named where it is implemented.
#pragma once

namespace longrun::simulate {

// z with P(Z <= z) = p for a standard normal Z, 0 < p < 1 (to about 1e-15).
double normal_quantile(double p);

// t with P(T <= t) = p for Student's t with `df` degrees of freedom (df >= 1),
// 0.5 <= p < 1; about six significant digits.
double student_t_quantile(double p, double df);

// P(X > x) for X chi-square with `df` degrees of freedom (df >= 1, x >= 0).
double chi_square_upper_tail(double x, double df);

} // namespace longrun::simulate
