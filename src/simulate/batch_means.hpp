// Batch-means confidence intervals for time averages of one long run, with the
// batch size growing like the square root of the run length: the consistent
// batch means of J. M. Flegal and G. L. Jones, "Batch means and spectral
// variance estimators in Markov chain Monte Carlo", Annals of Statistics 38(2),
// 2010, pp. 1034-1070.
//
// The run length may be a simulated time whose number of transitions is known
// only at the end, so the run is first cut into many small batches of equal
// length (in time units, or steps); at the end neighbours are merged pairwise
// until there are about sqrt(n) batches of about sqrt(n) transitions each. The
// store is bounded: when it is full, neighbours are merged early and the batch
// length doubles, which is the same pairwise merge done sooner.
#pragma once

#include <cstddef>
#include <cstdint>
#include <vector>

namespace longrun::simulate {

struct Interval {
    double mean = 0;
    double half_width = 0;     // infinity when fewer than two batches are complete
    double standard_error = 0; // of the mean, likewise
    std::uint64_t batches = 0;
    double batch_size = 0;
};

class BatchMeans {
  public:
    // `quantities` accumulators per batch; batches of `initial_length` (> 0);
    // at most `max_batches` (a power of two, >= 4) stored at once.
    BatchMeans(std::size_t quantities, double initial_length, std::size_t max_batches);

    // Where the open batch ends, on the run's own clock (0 at the start).
    double batch_end() const noexcept { return batch_end_; }
    // The open batch's accumulators: add value * duration for a time average,
    // 1 per firing for a count.
    double* open() noexcept { return open_.data(); }
    // Closes the open batch at batch_end() and opens the next.
    void close_batch();

    // The run ended at `run_length` on its clock after `n` transitions (ctmc) or
    // steps (dtmc): merges to about sqrt(n) batches and returns, per quantity,
    // the mean over the whole run (the open part included) and its interval at
    // `confidence`. Call once.
    std::vector<Interval> finish(double run_length, std::uint64_t n, double confidence);

    std::size_t stored_batches() const noexcept { return stored_; }
    double batch_length() const noexcept { return length_; }

  private:
    void merge_neighbours();

    std::size_t quantities_, max_batches_;
    double length_, batch_end_;
    std::size_t stored_ = 0;
    std::vector<double> sums_; // stored batches, quantities_ per batch
    std::vector<double> open_;
};

} // namespace longrun::simulate
