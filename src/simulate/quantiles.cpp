#include "quantiles.hpp"

#include <cmath>
#include <limits>
#include <numbers>
#include <stdexcept>

namespace longrun::simulate {

namespace {

double normal_lower_tail(double z) {
    return 0.5 * std::erfc(-z / std::numbers::sqrt2);
}

// Regularized lower incomplete gamma P(a, x) by its power series (converges
// fast for x < a + 1) and upper Q(a, x) by Lentz's continued fraction
// (x >= a + 1): the split of Press, Teukolsky, Vetterling & Flannery, Numerical
// Recipes, 3rd ed. (2007), section 6.2.
double gamma_lower_series(double a, double x) {
    double term = 1.0 / a, sum = term;
    for (int n = 1; n < 1000; ++n) {
        term *= x / (a + n);
        sum += term;
        if (std::abs(term) < std::abs(sum) * 1e-16)
            break;
    }
    return sum * std::exp(-x + a * std::log(x) - std::lgamma(a));
}

double gamma_upper_fraction(double a, double x) {
    constexpr double tiny = 1e-300;
    double b = x + 1 - a, c = 1 / tiny, d = 1 / b, h = d;
    for (int i = 1; i < 1000; ++i) {
        const double an = -i * (i - a);
        b += 2;
        d = an * d + b;
        if (std::abs(d) < tiny)
            d = tiny;
        c = b + an / c;
        if (std::abs(c) < tiny)
            c = tiny;
        d = 1 / d;
        const double step = d * c;
        h *= step;
        if (std::abs(step - 1) < 1e-16)
            break;
    }
    return std::exp(-x + a * std::log(x) - std::lgamma(a)) * h;
}

} // namespace

double normal_quantile(double p) {
    if (!(p > 0 && p < 1))
        throw std::invalid_argument("normal_quantile: p must lie in (0, 1)");
    if (p == 0.5)
        return 0;
    if (p > 0.5)
        return -normal_quantile(1 - p);
    // Start: Abramowitz & Stegun, Handbook of Mathematical Functions (1964),
    // formula 26.2.23 (error below 4.5e-4); then Halley's iteration on
    // Phi(z) - p with Phi from std::erfc, which is accurate in the lower tail,
    // to full double precision in two or three steps.
    const double t = std::sqrt(-2 * std::log(p));
    double z = -(t - (2.515517 + t * (0.802853 + t * 0.010328)) /
                         (1 + t * (1.432788 + t * (0.189269 + t * 0.001308))));
    for (int i = 0; i < 4; ++i) {
        const double error = normal_lower_tail(z) - p;
        const double u = error * std::sqrt(2 * std::numbers::pi) * std::exp(z * z / 2);
        z -= u / (1 + z * u / 2);
    }
    return z;
}

double student_t_quantile(double p, double df) {
    if (!(p >= 0.5 && p < 1) || !(df >= 1))
        throw std::invalid_argument("student_t_quantile: needs 0.5 <= p < 1 and df >= 1");
    if (p == 0.5)
        return 0;
    if (!std::isfinite(df) || df > 1e7)
        return normal_quantile(p);
    // G. W. Hill, "Algorithm 396: Student's t-quantiles", Communications of the
    // ACM 13(10), 1970, pp. 619-620. It takes the two-tailed probability.
    const double two_tailed = 2 * (1 - p);
    const double n = df;
    if (n == 1) {
        const double angle = two_tailed * std::numbers::pi / 2;
        return std::cos(angle) / std::sin(angle);
    }
    if (n == 2)
        return std::sqrt(2 / (two_tailed * (2 - two_tailed)) - 2);
    const double a = 1 / (n - 0.5);
    const double b = 48 / (a * a);
    double c = ((20700 * a / b - 98) * a - 16) * a + 96.36;
    const double d = ((94.5 / (b + c) - 3) / b + 1) * std::sqrt(a * std::numbers::pi / 2) * n;
    double x = d * two_tailed;
    double y = std::pow(x, 2 / n);
    if (y > 0.05 + a) {
        // Asymptotic inverse expansion about the normal quantile.
        x = normal_quantile(0.5 * two_tailed);
        y = x * x;
        if (n < 5)
            c += 0.3 * (n - 4.5) * (x + 0.6);
        c = (((0.05 * d * x - 5) * x - 7) * x - 2) * x + b + c;
        y = (((((0.4 * y + 6.3) * y + 36) * y + 94.5) / c - y - 3) / b + 1) * x;
        y = a * y * y;
        y = y > 0.002 ? std::expm1(y) : 0.5 * y * y + y;
    } else {
        y = ((1 / (((n + 6) / (n * y) - 0.089 * d - 0.822) * (n + 2) * 3) + 0.5 / (n + 4)) * y -
             1) *
                (n + 1) / (n + 2) +
            1 / y;
    }
    return std::sqrt(n * y);
}

double chi_square_upper_tail(double x, double df) {
    if (!(df > 0) || !(x >= 0))
        throw std::invalid_argument("chi_square_upper_tail: needs df > 0 and x >= 0");
    if (x == 0)
        return 1;
    if (std::isinf(x))
        return 0;
    const double a = df / 2, half = x / 2;
    return half < a + 1 ? 1 - gamma_lower_series(a, half) : gamma_upper_fraction(a, half);
}

} // namespace longrun::simulate
