#include "commands.hpp"
#include "option_range.hpp"

namespace longrun::cli {

void add_validation_options(CLI::App* sub, io::ValidationOptions& options) {
    sub->add_flag("--renormalize", options.renormalize,
                  "rescale dtmc rows that do not sum to 1 instead of refusing the file (reports "
                  "the largest correction)");
    sub->add_option("--row-sum-tol", options.row_sum_tolerance,
                    "allowed |row sum - 1| of a dtmc; for a ctmc generator read from Matrix "
                    "Market, the allowed |diagonal + sum of the row's rates| relative to the "
                    "larger of the two")
        ->default_val(1e-8)
        ->check(number_in(Interval::open_closed(0, 0.1)));
}

} // namespace longrun::cli
