// What the solve's estimated error ||pi_hat - pi||_1 = E means for the numbers a
// summary reports. For any set of states A, |P_hat(A) - P(A)| <= E / 2 (the
// positive and the negative parts of pi_hat - pi each weigh at most E / 2, as
// both vectors sum to 1); a mean of X with values in [a, b] is within
// (b - a) E / 2. A probability below E, twice its bound, is not resolved: the
// bound may be half of it or more, so even its first digit may be wrong.
#pragma once

#include "io/summary_record.hpp"

#include <optional>
#include <string>

namespace longrun::summary {

// The largest --tol whose bound is at most 5 % of `p`: the largest power of ten
// <= p / 10, capped at 1e-2 (the largest --tol). None for p <= 0.
std::optional<double> tol_to_resolve(double p);

// p >= 2 * bound. False for every p when the bound is infinite (no estimate).
bool probability_resolved(double p, double probability_bound);

// The same quantile for the exact distribution: the tails on either side of it,
// P(X >= q) and P(X > q), are farther than the bound from 1 - level.
bool quantile_resolved(const io::QuantileRecord& q, double probability_bound);

// Sets the record's probability bound, the mean bound of every measure, the
// quantile marks and the bound of every labelled event rate from the solve's
// estimated error. No estimate (a result from an older longrun): nothing is set.
void apply_error_bound(io::SummaryRecord& s, std::optional<double> error_estimate);

// "" for a resolved probability; " (unresolved: --tol 1e-11)" otherwise.
std::string unresolved_mark(double p, std::optional<double> probability_bound);

// The tail of `m` first unresolved: the index into m.values (tails fall with
// the value, so every later one is unresolved too); m.values.size() for none.
std::size_t first_unresolved_tail(const io::MeasureRecord& m, double probability_bound);

} // namespace longrun::summary
