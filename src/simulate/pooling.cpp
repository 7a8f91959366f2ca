// Combining replications: pool() and disagreeing_quantities() of simulation.hpp.
#include "quantiles.hpp"
#include "simulation.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <stdexcept>

namespace longrun::simulate {

namespace {

void check_same_quantities(const std::vector<ReplicationResult>& replications) {
    for (const auto& r : replications) {
        const auto& first = replications.front().estimates;
        bool same = r.estimates.size() == first.size();
        for (std::size_t q = 0; same && q < first.size(); ++q)
            same = r.estimates[q].name == first[q].name && r.estimates[q].kind == first[q].kind;
        if (!same)
            throw std::invalid_argument("replications estimate different quantities");
    }
}

// The variance of a replication's mean by batch means.
double variance_of_mean(const Estimate& e) {
    if (e.batches < 2 || !std::isfinite(e.standard_error))
        return std::numeric_limits<double>::infinity();
    return e.standard_error * e.standard_error;
}

} // namespace

std::vector<Estimate> pool(const std::vector<ReplicationResult>& replications, double confidence) {
    if (replications.empty())
        return {};
    check_same_quantities(replications);
    // Weighted by simulated length, so that the pooled mean is the time average
    // over all runs taken together.
    double length = 0;
    for (const auto& r : replications)
        length += r.simulated;
    std::vector<double> weight;
    for (const auto& r : replications)
        weight.push_back(length > 0 ? r.simulated / length : 1.0 / double(replications.size()));

    std::vector<Estimate> out;
    for (std::size_t q = 0; q < replications.front().estimates.size(); ++q) {
        Estimate pooled;
        pooled.name = replications.front().estimates[q].name;
        pooled.kind = replications.front().estimates[q].kind;
        // Independent runs: the pooled mean's variance is the weighted sum of the
        // runs' variances; its degrees of freedom by the Welch-Satterthwaite
        // approximation (F. E. Satterthwaite, "An approximate distribution of
        // estimates of variance components", Biometrics Bulletin 2(6), 1946).
        double variance = 0, df_denominator = 0, size = 0;
        for (std::size_t r = 0; r < replications.size(); ++r) {
            const Estimate& e = replications[r].estimates[q];
            pooled.mean += weight[r] * e.mean;
            pooled.batches += e.batches;
            size += e.batch_size / double(replications.size());
            const double part = weight[r] * weight[r] * variance_of_mean(e);
            variance += part;
            if (e.batches >= 2)
                df_denominator += part * part / double(e.batches - 1);
        }
        pooled.batch_size = size;
        if (!std::isfinite(variance))
            pooled.half_width = pooled.standard_error = std::numeric_limits<double>::infinity();
        else if (variance == 0)
            pooled.half_width = 0;
        else {
            const double df = std::max(1.0, variance * variance / df_denominator);
            pooled.standard_error = std::sqrt(variance);
            pooled.half_width =
                student_t_quantile(1 - (1 - confidence) / 2, df) * pooled.standard_error;
        }
        out.push_back(pooled);
    }
    return out;
}

std::vector<std::string> disagreeing_quantities(const std::vector<ReplicationResult>& replications,
                                                double significance) {
    std::vector<std::string> out;
    if (replications.size() < 2)
        return out;
    check_same_quantities(replications);
    for (std::size_t q = 0; q < replications.front().estimates.size(); ++q) {
        // Cochran's Q test of homogeneity (W. G. Cochran, "The combination of
        // estimates from different experiments", Biometrics 10(1), 1954): with
        // inverse-variance weights w_r, Q = sum_r w_r (m_r - m_w)^2 is about
        // chi-square with k - 1 degrees of freedom when all k runs estimate the
        // same number. A run whose quantity never varied (held in one state) has
        // variance 0: a floor at rounding level keeps it decisive without
        // dividing by zero.
        double scale = 1;
        for (const auto& r : replications)
            if (std::isfinite(r.estimates[q].mean))
                scale = std::max(scale, std::abs(r.estimates[q].mean));
        const double floor = (1e-12 * scale) * (1e-12 * scale);
        std::vector<double> w, m;
        for (const auto& r : replications) {
            const Estimate& e = r.estimates[q];
            const double v = variance_of_mean(e);
            if (std::isfinite(e.mean) && std::isfinite(v)) {
                w.push_back(1 / (v + floor));
                m.push_back(e.mean);
            }
        }
        if (w.size() < 2)
            continue;
        double sum_w = 0, centre = 0;
        for (std::size_t r = 0; r < w.size(); ++r) {
            sum_w += w[r];
            centre += w[r] * m[r];
        }
        centre /= sum_w;
        double statistic = 0;
        for (std::size_t r = 0; r < w.size(); ++r)
            statistic += w[r] * (m[r] - centre) * (m[r] - centre);
        if (chi_square_upper_tail(statistic, double(w.size() - 1)) < significance)
            out.push_back(replications.front().estimates[q].name);
    }
    return out;
}

} // namespace longrun::simulate
