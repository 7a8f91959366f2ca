#include "commands.hpp"
#include "option_range.hpp"

namespace longrun::cli {

void add_validation_options(CLI::App* sub, io::ValidationOptions& options) {
    sub->add_flag("--renormalize", options.renormalize,
                  "rescale dtmc rows that do not sum to 1 instead of refusing the file (reports "
                  "the largest correction)");
    sub->add_option("--row-sum-tol", options.row_sum_tolerance, "allowed |row sum - 1| of a dtmc")
        ->default_val(1e-8)
        ->check(number_in(Interval::open_closed(0, 0.1)));
}

} // namespace longrun::cli
