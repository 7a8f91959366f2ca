// The summary part of a result file (/summary, next to what `solve` wrote) and
// a reader of the result's small parts. Serial: rank 0 calls these.
//
// Layout written by write_summary (README "Result file"):
//   /summary                     attr probability_error_bound (||pi_hat - pi||_1 / 2;
//                                absent when the result has no error estimate)
//   /summary/measures            attr order (names as given)
//   /summary/measures/<m>        attrs name, origin, mean, std, binned, integral,
//                                q<level> per quantile (e.g. q0.999), and where known
//                                lower_bound, upper_bound, mass_at_lower_bound,
//                                mass_at_upper_bound, mean_error_bound; datasets
//                                values, pmf, tail, quantile_levels, quantile_values,
//                                quantile_resolved (u64 0/1, with the bound)
//   /summary/measures/<m>/given/<k>  attrs condition, probability, mean (absent if P = 0)
//   /summary/probabilities       datasets names, conditions (strings), values (f64)
//   /summary/events              attrs unit, order
//   /summary/events/<e>          attrs name, rate, source, expression, error_bound
//                                (labelled events, with the bound)
//   /summary/likely_states       datasets index (u64), probability (f64), one f64
//                                dataset per state variable; attr variables (order)
// A name becomes an HDF5 link name through link_name() ('/' and '%' escaped).
#pragma once

#include "result_file.hpp"
#include "summary_record.hpp"

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

namespace longrun::io {

// What a result file says about itself, without its per-state data.
struct ResultInfo {
    std::string path;
    ResultOrigin origin;
    CertificateRecord certificate;
    // certificate.error_estimate as read; absent in results from an older longrun.
    std::optional<double> error_estimate;
    std::vector<HistoryRecord> history; // in the order the attempts ran
    bool has_distribution = false;
    std::uint64_t states = 0; // length of /distribution (or of /classes/class_of without it)
};

// Replaces /summary/{measures,probabilities,events,likely_states} of an existing
// result file; /summary/variables (written by solve) and everything else stay.
// The result is copied object by object (less the parts replaced) into a
// temporary file in the same folder, which is renamed over the original, so a
// failure leaves the original as it was. InputError when `result_path` is not a
// result file; OutputError when the new file cannot be written.
void write_summary(const std::string& result_path, const SummaryRecord& summary);

// Reads back what write_summary stored (missing parts read as empty).
SummaryRecord read_summary(const std::string& result_path);

// InputError naming the file for anything missing, or a file that is not a result.
ResultInfo read_result_info(const std::string& path);

// A name as an HDF5 link name: '%' -> %25 and '/' -> %2F (HDF5 would read a
// '/' as a path). The name ".", and a name among `reserved` (the fixed datasets
// beside it), get their first character escaped the same way. Decoding %XX
// gives the name back. OutputError for an empty name.
std::string link_name(const std::string& name, const std::vector<std::string>& reserved = {});

} // namespace longrun::io
