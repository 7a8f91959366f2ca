#include "batch_means.hpp"

#include "quantiles.hpp"

#include <cmath>
#include <limits>
#include <numbers>
#include <stdexcept>

namespace longrun::simulate {

BatchMeans::BatchMeans(std::size_t quantities, double initial_length, std::size_t max_batches)
    : quantities_(quantities), max_batches_(max_batches), length_(initial_length),
      batch_end_(initial_length), sums_(quantities * max_batches, 0.0), open_(quantities, 0.0) {
    if (!(initial_length > 0) || !std::isfinite(initial_length))
        throw std::invalid_argument("batch means: the batch length must be positive");
    if (max_batches < 4 || (max_batches & (max_batches - 1)) != 0)
        throw std::invalid_argument("batch means: the batch store must be a power of two >= 4");
}

void BatchMeans::merge_neighbours() {
    // An odd batch out (only at the end) is dropped from the variance; its data
    // stays in the run's mean, which finish() takes before merging.
    const std::size_t pairs = stored_ / 2;
    for (std::size_t j = 0; j < pairs; ++j)
        for (std::size_t q = 0; q < quantities_; ++q)
            sums_[j * quantities_ + q] =
                sums_[2 * j * quantities_ + q] + sums_[(2 * j + 1) * quantities_ + q];
    stored_ = pairs;
    length_ *= 2;
}

void BatchMeans::close_batch() {
    if (stored_ == max_batches_) {
        // A full store holds an even number: the open batch, one old length
        // long, becomes the first half of a batch of the doubled length.
        merge_neighbours();
    } else {
        for (std::size_t q = 0; q < quantities_; ++q) {
            sums_[stored_ * quantities_ + q] = open_[q];
            open_[q] = 0;
        }
        ++stored_;
    }
    // From the count, not by adding lengths up: no drift over millions of batches.
    batch_end_ = static_cast<double>(stored_ + 1) * length_;
}

std::vector<Interval> BatchMeans::finish(double run_length, std::uint64_t n, double confidence) {
    std::vector<double> totals(open_);
    for (std::size_t j = 0; j < stored_; ++j)
        for (std::size_t q = 0; q < quantities_; ++q)
            totals[q] += sums_[j * quantities_ + q];
    // The open batch counts as complete when it falls short only by rounding
    // (the caller sized the batches to fill the run) and there is room for it.
    const double open_length = run_length - (batch_end_ - length_);
    if (open_length >= length_ * (1 - 1e-6) && stored_ < max_batches_) {
        for (std::size_t q = 0; q < quantities_; ++q)
            sums_[stored_ * quantities_ + q] = open_[q];
        ++stored_;
    }
    // About sqrt(n) batches (within a factor sqrt(2): the merges halve the count).
    const double wanted = std::sqrt(static_cast<double>(n));
    while (stored_ >= 4 && static_cast<double>(stored_) > std::numbers::sqrt2 * wanted)
        merge_neighbours();

    std::vector<Interval> out(quantities_);
    const std::size_t a = stored_;
    const double t = a >= 2 ? student_t_quantile(1 - (1 - confidence) / 2, double(a - 1)) : 0;
    for (std::size_t q = 0; q < quantities_; ++q) {
        Interval& iv = out[q];
        iv.mean =
            run_length > 0 ? totals[q] / run_length : std::numeric_limits<double>::quiet_NaN();
        iv.batches = a;
        iv.batch_size = length_;
        if (a < 2) {
            iv.half_width = iv.standard_error = std::numeric_limits<double>::infinity();
            continue;
        }
        double centre = 0;
        for (std::size_t j = 0; j < a; ++j)
            centre += sums_[j * quantities_ + q] / length_;
        centre /= double(a);
        double squares = 0;
        for (std::size_t j = 0; j < a; ++j) {
            const double d = sums_[j * quantities_ + q] / length_ - centre;
            squares += d * d;
        }
        iv.standard_error = std::sqrt(squares / double(a - 1) / double(a));
        iv.half_width = t * iv.standard_error;
    }
    return out;
}

} // namespace longrun::simulate
