#include "chain_file.hpp"

#include "atomic_output.hpp"
#include "chain_hash.hpp"
#include "format.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <limits>

namespace longrun::io {

namespace {

std::vector<std::string> group_members(hid_t group) {
    std::vector<std::string> names;
    auto collect = [](hid_t, const char* name, const H5L_info_t*, void* out) -> herr_t {
        static_cast<std::vector<std::string>*>(out)->emplace_back(name);
        return 0;
    };
    H5Literate(group, H5_INDEX_NAME, H5_ITER_INC, nullptr, collect, &names);
    return names;
}

// Parameters are one attribute each, so their order is the attributes' order:
// creation order where the group tracks it (as written here), else by name.
std::vector<std::string> attribute_names(hid_t loc) {
    H5_index_t index = H5_INDEX_NAME;
    h5::Handle gcpl(H5Gget_create_plist(loc), H5Pclose);
    unsigned flags = 0;
    if (gcpl.valid() && H5Pget_attr_creation_order(gcpl, &flags) >= 0 &&
        (flags & H5P_CRT_ORDER_INDEXED) != 0)
        index = H5_INDEX_CRT_ORDER;
    std::vector<std::string> names;
    auto collect = [](hid_t, const char* name, const H5A_info_t*, void* out) -> herr_t {
        static_cast<std::vector<std::string>*>(out)->emplace_back(name);
        return 0;
    };
    hsize_t position = 0;
    H5Aiterate2(loc, index, H5_ITER_INC, &position, collect, &names);
    return names;
}

h5::Handle create_ordered_group(hid_t loc, const std::string& name, const std::string& file) {
    h5::Handle gcpl(H5Pcreate(H5P_GROUP_CREATE), H5Pclose);
    if (!gcpl.valid() ||
        H5Pset_attr_creation_order(gcpl, H5P_CRT_ORDER_TRACKED | H5P_CRT_ORDER_INDEXED) < 0)
        h5::fail(h5::Side::writing, file, "cannot set up group '" + name + "'");
    h5::Handle g(H5Gcreate2(loc, name.c_str(), H5P_DEFAULT, gcpl, H5P_DEFAULT), H5Gclose);
    if (!g.valid())
        h5::fail(h5::Side::writing, file, "cannot create group '" + name + "'");
    return g;
}

// Also requires every element to be stored: buffers are sized by these lengths,
// so a length the file merely announces must not get that far.
void require_length(hid_t d, const std::string& file, const std::string& name,
                    std::uint64_t expected, const std::string& why) {
    const auto n = h5::length_1d(d, file, name);
    if (n != expected)
        h5::fail(h5::Side::reading, file,
                 name + ": has " + std::to_string(n) + " elements, expected " +
                     std::to_string(expected) + " (" + why + ")");
    if (const auto missing = h5::missing_storage(d))
        h5::fail(h5::Side::reading, file,
                 name + ": claims " + std::to_string(n) + " elements but " + *missing);
}

void require_class(hid_t d, const std::string& file, const std::string& name,
                   std::initializer_list<h5::Numeric> allowed, const std::string& wanted) {
    const auto cls = h5::numeric_class(d);
    if (std::find(allowed.begin(), allowed.end(), cls) == allowed.end())
        h5::fail(h5::Side::reading, file, name + ": wrong element type, expected " + wanted);
}

std::string row_prefix(const std::string& file, const std::string& dataset, std::uint64_t row) {
    return file + ": " + dataset + ": row " + std::to_string(row) + ": ";
}

// HDF5 turns a negative value of a signed dataset into 0 when it is read as
// unsigned, so a target of -1 would quietly become state 0. Signed data is read
// as int64 instead (exact for every width) into the same storage, where a set
// top bit marks a negative value. Returns the position of the first one.
std::optional<std::uint64_t> read_nonnegative(hid_t d, std::uint64_t offset, std::uint64_t count,
                                              std::uint64_t* out, const std::string& file,
                                              const std::string& name,
                                              h5::Access access = h5::Access::collective) {
    const bool is_signed = h5::numeric_class(d) == h5::Numeric::signed_integer;
    h5::read_range(d, is_signed ? H5T_NATIVE_INT64 : H5T_NATIVE_UINT64, offset, count, out, access,
                   file, name);
    if (is_signed)
        for (std::uint64_t i = 0; i < count; ++i)
            if (out[i] >> 63)
                return i;
    return std::nullopt;
}

std::string negative_value(std::uint64_t bits, const std::string& what) {
    return what + " " + std::to_string(static_cast<std::int64_t>(bits)) +
           " is negative (the dataset is signed; it must hold values >= 0)";
}

} // namespace

ChainHeader read_chain_header(const std::string& path, MPI_Comm comm) {
    ChainHeader h;
    h.path = path;
    // One rank reads the metadata and shares it: thousands of ranks opening the
    // same attributes at once is what makes parallel file systems slow.
    std::optional<LocalFault> fault;
    std::vector<char> packed;
    if (comm_rank(comm) == 0) {
        try {
            h5::Handle f = h5::open_for_reading(path, std::nullopt);
            const std::string schema = h5::has_attribute(f, "schema")
                                           ? h5::read_string_attribute(f, "schema", path, "/")
                                           : std::string();
            if (schema != chain_schema)
                h5::fail(h5::Side::reading, path,
                         "not a longrun chain file (root attribute 'schema' is '" + schema +
                             "', expected '" + chain_schema + "')");
            const auto version = h5::read_u64_attribute(f, "schema_version", path, "/");
            if (version != chain_schema_version)
                h5::fail(h5::Side::reading, path,
                         "chain schema version " + std::to_string(version) +
                             " is not supported (this longrun reads version " +
                             std::to_string(chain_schema_version) + ")");
            h5::Handle g = h5::open_group(f, "/chain", path);
            const auto kind_text = h5::read_string_attribute(g, "kind", path, "/chain");
            const auto kind = parse_kind(kind_text);
            if (!kind)
                h5::fail(h5::Side::reading, path,
                         "/chain: attribute 'kind' is '" + kind_text + "', expected ctmc or dtmc");
            h.kind = *kind;
            h.states = h5::read_u64_attribute(g, "states", path, "/chain");
            h.transitions = h5::read_u64_attribute(g, "transitions", path, "/chain");
            if (h.states == 0)
                h5::fail(h5::Side::reading, path, "/chain: the chain has no states");
            if (h.states == std::numeric_limits<std::uint64_t>::max())
                h5::fail(h5::Side::reading, path, "/chain: attribute 'states' is out of range");
            {
                h5::Handle d = h5::open_dataset(f, "/chain/offsets", path);
                require_class(d, path, "/chain/offsets",
                              {h5::Numeric::unsigned_integer, h5::Numeric::signed_integer},
                              "integers");
                require_length(d, path, "/chain/offsets", h.states + 1, "states + 1");
            }
            {
                h5::Handle d = h5::open_dataset(f, "/chain/targets", path);
                require_class(d, path, "/chain/targets",
                              {h5::Numeric::unsigned_integer, h5::Numeric::signed_integer},
                              "integers");
                require_length(d, path, "/chain/targets", h.transitions, "transitions");
            }
            {
                h5::Handle d = h5::open_dataset(f, "/chain/weights", path);
                require_class(d, path, "/chain/weights", {h5::Numeric::floating}, "floating point");
                require_length(d, path, "/chain/weights", h.transitions, "transitions");
            }
            if (h5::exists(f, "/chain/events")) {
                h5::Handle d = h5::open_dataset(f, "/chain/events", path);
                require_class(d, path, "/chain/events",
                              {h5::Numeric::unsigned_integer, h5::Numeric::signed_integer},
                              "integers");
                require_length(d, path, "/chain/events", h.transitions, "transitions");
                h.has_events = true;
                h.event_names = h5::read_string_list_attribute(g, "event_names", path, "/chain");
            }
            if (h5::exists(f, "/states")) {
                h5::Handle s = h5::open_group(f, "/states", path);
                std::vector<std::string> order =
                    h5::has_attribute(s, "order")
                        ? h5::read_string_list_attribute(s, "order", path, "/states")
                        : group_members(s);
                for (const auto& name : order) {
                    const std::string ds = "/states/" + name;
                    h5::Handle d = h5::open_dataset(f, ds, path);
                    const auto cls = h5::numeric_class(d);
                    require_class(d, path, ds,
                                  {h5::Numeric::signed_integer, h5::Numeric::unsigned_integer,
                                   h5::Numeric::floating},
                                  "integers or floating point");
                    require_length(d, path, ds, h.states, "one value per state");
                    StateVariable v;
                    v.name = name;
                    v.integral = cls != h5::Numeric::floating;
                    if (h5::has_attribute(s, name + ".lower"))
                        v.lower = h5::read_f64_attribute(s, name + ".lower", path, "/states");
                    if (h5::has_attribute(s, name + ".upper"))
                        v.upper = h5::read_f64_attribute(s, name + ".upper", path, "/states");
                    h.variables.push_back(std::move(v));
                }
            }
            if (h5::exists(f, "/measures")) {
                h5::Handle m = h5::open_group(f, "/measures", path);
                for (const auto& name : group_members(m)) {
                    const std::string ds = "/measures/" + name;
                    h5::Handle d = h5::open_dataset(f, ds, path);
                    require_class(d, path, ds,
                                  {h5::Numeric::floating, h5::Numeric::signed_integer,
                                   h5::Numeric::unsigned_integer},
                                  "numbers");
                    require_length(d, path, ds, h.states, "one value per state");
                    h.measures.push_back(name);
                }
            }
            if (h5::exists(f, "/events")) {
                h5::Handle g = h5::open_group(f, "/events", path);
                const std::vector<std::string> order =
                    h5::has_attribute(g, "order")
                        ? h5::read_string_list_attribute(g, "order", path, "/events")
                        : group_members(g);
                for (const auto& name : order) {
                    const std::string ds = "/events/" + name;
                    h5::Handle d = h5::open_dataset(f, ds, path);
                    require_class(d, path, ds,
                                  {h5::Numeric::floating, h5::Numeric::signed_integer,
                                   h5::Numeric::unsigned_integer},
                                  "numbers");
                    require_length(d, path, ds, h.states, "one value per state");
                    h.intensities.push_back(name);
                }
            }
            if (h5::exists(f, "/model")) {
                h5::Handle g = h5::open_group(f, "/model", path);
                if (h5::has_attribute(g, "file"))
                    h.model_file = h5::read_string_attribute(g, "file", path, "/model");
                if (h5::has_attribute(g, "text"))
                    h.model_text = h5::read_string_attribute(g, "text", path, "/model");
                if (h5::exists(f, "/model/parameters")) {
                    h5::Handle p = h5::open_group(f, "/model/parameters", path);
                    for (const auto& name : attribute_names(p))
                        h.parameters.emplace_back(
                            name, h5::read_f64_attribute(p, name, path, "/model/parameters"));
                }
            }
        } catch (const Error& e) {
            fault = LocalFault{0, e.code(), e.what()};
        }
    }
    agree_or_throw(comm, fault);

    // Share the header: a small text record is simpler than an MPI datatype.
    std::string record;
    if (comm_rank(comm) == 0) {
        auto put = [&](const std::string& s) { record += std::to_string(s.size()) + ":" + s; };
        put(to_string(h.kind));
        put(std::to_string(h.states));
        put(std::to_string(h.transitions));
        put(h.has_events ? "1" : "0");
        put(std::to_string(h.event_names.size()));
        for (auto& e : h.event_names)
            put(e);
        put(std::to_string(h.variables.size()));
        for (auto& v : h.variables) {
            put(v.name);
            put(v.integral ? "1" : "0");
            put(v.lower ? fmt_double(*v.lower) : "");
            put(v.upper ? fmt_double(*v.upper) : "");
        }
        put(std::to_string(h.measures.size()));
        for (auto& m : h.measures)
            put(m);
        put(std::to_string(h.intensities.size()));
        for (auto& e : h.intensities)
            put(e);
        put(h.model_file);
        put(h.model_text);
        put(std::to_string(h.parameters.size()));
        for (auto& [name, value] : h.parameters) {
            put(name);
            put(fmt::format("{}", value)); // shortest text that reads back as the same double
        }
    }
    unsigned long size = record.size();
    MPI_Bcast(&size, 1, MPI_UNSIGNED_LONG, 0, comm);
    record.resize(size);
    MPI_Bcast(record.data(), static_cast<int>(size), MPI_CHAR, 0, comm);
    if (comm_rank(comm) != 0) {
        std::size_t pos = 0;
        auto get = [&]() {
            const auto colon = record.find(':', pos);
            const auto n = std::stoull(record.substr(pos, colon - pos));
            std::string s = record.substr(colon + 1, n);
            pos = colon + 1 + n;
            return s;
        };
        h.kind = *parse_kind(get());
        h.states = std::stoull(get());
        h.transitions = std::stoull(get());
        h.has_events = get() == "1";
        const auto ne = std::stoull(get());
        for (std::uint64_t i = 0; i < ne; ++i)
            h.event_names.push_back(get());
        const auto nv = std::stoull(get());
        for (std::uint64_t i = 0; i < nv; ++i) {
            StateVariable v;
            v.name = get();
            v.integral = get() == "1";
            if (auto s = get(); !s.empty())
                v.lower = std::stod(s);
            if (auto s = get(); !s.empty())
                v.upper = std::stod(s);
            h.variables.push_back(std::move(v));
        }
        const auto nm = std::stoull(get());
        for (std::uint64_t i = 0; i < nm; ++i)
            h.measures.push_back(get());
        const auto ni = std::stoull(get());
        for (std::uint64_t i = 0; i < ni; ++i)
            h.intensities.push_back(get());
        h.model_file = get();
        h.model_text = get();
        const auto np = std::stoull(get());
        for (std::uint64_t i = 0; i < np; ++i) {
            std::string name = get();
            h.parameters.emplace_back(std::move(name), std::stod(get()));
        }
    }
    return h;
}

std::vector<std::uint64_t> read_offsets(const ChainHeader& header, RowRange rows, MPI_Comm comm) {
    std::optional<LocalFault> fault;
    std::vector<std::uint64_t> offsets;
    h5::Handle f = h5::open_for_reading(header.path, comm);
    h5::Handle d = h5::open_dataset(f, "/chain/offsets", header.path);
    try {
        // Independent, not collective: the ranges overlap (each ends where the next
        // begins), and Open MPI 4.1's own MPI-IO layer (OMPIO) returns wrong values
        // to a rank whose range starts where a lower rank's one-element range does
        // (a rank with no rows just before it), e.g. offsets 1 0 4 for 1 4 5.
        // One contiguous block per rank gains nothing from collective buffering.
        offsets.resize(rows.size() + 1);
        if (const auto at = read_nonnegative(d, rows.begin, offsets.size(), offsets.data(),
                                             header.path, "/chain/offsets", h5::Access::serial)) {
            // The last offset ends the last row rather than starting a row of its own.
            const auto row = std::min(rows.begin + *at, header.states - 1);
            fault = LocalFault{row, ExitCode::bad_input,
                               row_prefix(header.path, "/chain/offsets", row) +
                                   negative_value(offsets[*at], "offset")};
        }
    } catch (const Error& e) {
        fault = LocalFault{rows.begin, e.code(), e.what()};
    }
    agree_or_throw(comm, fault);
    return offsets;
}

static std::optional<LocalFault> validate_offsets(const std::vector<std::uint64_t>& offsets,
                                                  RowRange rows, std::uint64_t states,
                                                  std::uint64_t transitions,
                                                  const std::string& file) {
    const std::string ds = "/chain/offsets";
    if (rows.begin == 0 && offsets.front() != 0)
        return LocalFault{0, ExitCode::bad_input,
                          row_prefix(file, ds, 0) + "offsets must start at 0, found " +
                              std::to_string(offsets.front())};
    for (std::uint64_t i = 0; i < rows.size(); ++i) {
        if (offsets[i + 1] < offsets[i])
            return LocalFault{rows.begin + i, ExitCode::bad_input,
                              row_prefix(file, ds, rows.begin + i) + "offsets decrease (" +
                                  std::to_string(offsets[i]) + " then " +
                                  std::to_string(offsets[i + 1]) + ")"};
        if (offsets[i + 1] > transitions)
            return LocalFault{rows.begin + i, ExitCode::bad_input,
                              row_prefix(file, ds, rows.begin + i) + "offset " +
                                  std::to_string(offsets[i + 1]) + " is past the " +
                                  std::to_string(transitions) + " transitions"};
    }
    if (rows.end == states && offsets.back() != transitions)
        return LocalFault{states - 1, ExitCode::bad_input,
                          file + ": " + ds + ": the last offset is " +
                              std::to_string(offsets.back()) + ", expected " +
                              std::to_string(transitions) + " (the number of transitions)"};
    return std::nullopt;
}

std::optional<LocalFault> validate_slice(Chain& c, const std::string& file,
                                         const ValidationOptions& options,
                                         ValidationReport& report) {
    const bool ctmc = c.kind == ChainKind::ctmc;
    for (std::uint64_t i = 0; i < c.local_rows(); ++i) {
        const std::uint64_t row = c.rows.begin + i;
        double sum = 0;
        for (auto k = c.offsets[i]; k < c.offsets[i + 1]; ++k) {
            const auto t = c.targets[k];
            if (t >= c.states)
                return LocalFault{row, ExitCode::bad_input,
                                  row_prefix(file, "/chain/targets", row) + "target " +
                                      std::to_string(t) + " is out of range (the chain has " +
                                      std::to_string(c.states) + " states)"};
            if (k > c.offsets[i] && t <= c.targets[k - 1])
                return LocalFault{
                    row, ExitCode::bad_input,
                    row_prefix(file, "/chain/targets", row) + "target " + std::to_string(t) +
                        (t == c.targets[k - 1] ? " appears twice"
                                               : " follows " + std::to_string(c.targets[k - 1])) +
                        " (targets must increase strictly within a row)"};
            const double w = c.weights[k];
            if (!std::isfinite(w) || w < 0)
                return LocalFault{
                    row, ExitCode::bad_input,
                    row_prefix(file, "/chain/weights", row) + "weight " + fmt_double(w) +
                        " towards state " + std::to_string(t) + " is " +
                        (std::isfinite(w) ? "negative" : "not finite") +
                        (ctmc ? " (rates must be > 0)" : " (probabilities must be >= 0)")};
            if (w == 0)
                ++report.explicit_zeros;
            if (ctmc && t == row)
                ++report.ctmc_self_loops;
            if (!c.events.empty() && c.events[k] >= c.event_names.size())
                return LocalFault{row, ExitCode::bad_input,
                                  row_prefix(file, "/chain/events", row) + "event index " +
                                      std::to_string(c.events[k]) + " has no name (" +
                                      std::to_string(c.event_names.size()) + " event_names)"};
            if (!(ctmc && t == row))
                sum += w;
        }
        // Finite rates can still add up to infinity, and the generator's diagonal
        // (minus the total) with them: no solver can work with that row.
        if (ctmc && !std::isfinite(sum))
            return LocalFault{row, ExitCode::bad_input,
                              row_prefix(file, "/chain/weights", row) +
                                  "the rates out of the state add up to more than the largest "
                                  "double (" +
                                  fmt_double(std::numeric_limits<double>::max()) +
                                  "); choose a longer time unit"};
        const double off = std::abs(sum - 1.0);
        const bool beyond_tolerance = !ctmc && off > options.row_sum_tolerance;
        if (beyond_tolerance) {
            // A sum that overflowed would rescale the row to zeros.
            const bool rescalable = sum > 0 && std::isfinite(sum);
            if (!options.renormalize || !rescalable)
                return LocalFault{row, ExitCode::bad_input,
                                  row_prefix(file, "/chain/weights", row) +
                                      "probabilities sum to " + fmt_double(sum) +
                                      ", not 1 (tolerance " +
                                      fmt_double(options.row_sum_tolerance) +
                                      (sum == 0      ? "; an empty row cannot be renormalized)"
                                       : !rescalable ? "; too large to be renormalized)"
                                                     : "; --renormalize rescales such rows)")};
            ++report.renormalized_rows;
            report.largest_correction = std::max(report.largest_correction, off);
        }
        // A row accepted within the tolerance is rounded data, yet left as it is it
        // leaks (or adds) mass, and no vector can then meet a certificate tighter than
        // that deviation. Rows already 1 up to the rounding of their own sum keep
        // their bits, so that exact files round-trip unchanged.
        const double rounding = 4 * std::numeric_limits<double>::epsilon() *
                                static_cast<double>(c.offsets[i + 1] - c.offsets[i]);
        if (!ctmc && sum > 0 && (beyond_tolerance || off > rounding))
            for (auto k = c.offsets[i]; k < c.offsets[i + 1]; ++k)
                c.weights[k] /= sum;
    }
    for (const auto& v : c.variables)
        for (std::uint64_t i = 0; i < v.values.size(); ++i)
            if (!std::isfinite(v.values[i]))
                return LocalFault{c.rows.begin + i, ExitCode::bad_input,
                                  row_prefix(file, "/states/" + v.name, c.rows.begin + i) +
                                      "value is not finite"};
    for (const auto& e : c.event_intensities)
        for (std::uint64_t i = 0; i < e.values.size(); ++i) {
            const double x = e.values[i];
            if (!std::isfinite(x) || x < 0)
                return LocalFault{c.rows.begin + i, ExitCode::bad_input,
                                  row_prefix(file, "/events/" + e.name, c.rows.begin + i) +
                                      "intensity " + fmt_double(x) + " is " +
                                      (std::isfinite(x) ? "negative" : "not finite") +
                                      " (an event fires at a rate, or with a probability, >= 0)"};
        }
    return std::nullopt;
}

Chain read_chain_slice(const ChainHeader& h, RowRange rows, MPI_Comm comm,
                       const ValidationOptions& options, ValidationReport* report_out) {
    Chain c;
    c.kind = h.kind;
    c.states = h.states;
    c.transitions = h.transitions;
    c.rows = rows;
    c.event_names = h.event_names;
    const std::string& file = h.path;

    std::vector<std::uint64_t> global = read_offsets(h, rows, comm);
    // Validate the row pointer before trusting it to size anything.
    agree_or_throw(comm, validate_offsets(global, rows, h.states, h.transitions, file));
    const std::uint64_t first = global.front();
    const std::uint64_t count = global.back() - first;
    c.offsets.resize(global.size());
    for (std::size_t i = 0; i < global.size(); ++i)
        c.offsets[i] = global[i] - first;

    h5::Handle f = h5::open_for_reading(file, comm);
    std::optional<LocalFault> fault;
    auto note = [&](LocalFault found) {
        if (!fault || found.row < fault->row)
            fault = std::move(found);
    };
    auto guarded = [&](auto&& body) {
        try {
            body();
        } catch (const Error& e) {
            note(LocalFault{rows.begin, e.code(), e.what()});
        }
    };
    auto row_of_entry = [&](std::uint64_t k) {
        const auto after = std::upper_bound(c.offsets.begin(), c.offsets.end(), k);
        return rows.begin + static_cast<std::uint64_t>(after - c.offsets.begin()) - 1;
    };
    // Every rank performs every collective read in the same order, even after a
    // local failure, so that no rank is left waiting.
    auto read_all = [&](const std::string& name, auto& out, std::uint64_t offset, std::uint64_t n) {
        using T = typename std::decay_t<decltype(out)>::value_type;
        h5::Handle d = h5::open_dataset(f, name, file);
        out.assign(n, T{});
        guarded([&] {
            h5::read_range(d, h5::native_type<T>(), offset, n, out.data(), h5::Access::collective,
                           file, name);
        });
    };
    {
        h5::Handle d = h5::open_dataset(f, "/chain/targets", file);
        c.targets.assign(count, 0);
        guarded([&] {
            if (const auto k =
                    read_nonnegative(d, first, count, c.targets.data(), file, "/chain/targets"))
                note(LocalFault{row_of_entry(*k), ExitCode::bad_input,
                                row_prefix(file, "/chain/targets", row_of_entry(*k)) +
                                    negative_value(c.targets[*k], "target")});
        });
    }
    read_all("/chain/weights", c.weights, first, count);
    if (h.has_events) {
        h5::Handle d = h5::open_dataset(f, "/chain/events", file);
        const bool fits = h5::numeric_class(d) == h5::Numeric::unsigned_integer &&
                          h5::element_size(d) <= sizeof(std::uint16_t);
        if (fits) {
            read_all("/chain/events", c.events, first, count);
        } else {
            // Labels are 16 bits in memory, and HDF5 would clamp a wider value into
            // that range (70000 becoming 65535, a label that may well exist).
            std::vector<std::uint64_t> wide(count);
            guarded([&] {
                if (const auto k =
                        read_nonnegative(d, first, count, wide.data(), file, "/chain/events"))
                    note(LocalFault{row_of_entry(*k), ExitCode::bad_input,
                                    row_prefix(file, "/chain/events", row_of_entry(*k)) +
                                        negative_value(wide[*k], "event index")});
            });
            c.events.assign(count, 0);
            for (std::uint64_t k = 0; k < count; ++k) {
                constexpr std::uint64_t largest = std::numeric_limits<std::uint16_t>::max();
                if (wide[k] > largest) { // a negative one was noted above, at this row or before
                    note(LocalFault{row_of_entry(k), ExitCode::bad_input,
                                    row_prefix(file, "/chain/events", row_of_entry(k)) +
                                        "event index " + std::to_string(wide[k]) + " is beyond " +
                                        std::to_string(largest) + ", the largest event label"});
                    break;
                }
                c.events[k] = static_cast<std::uint16_t>(wide[k]);
            }
        }
    }
    for (const auto& spec : h.variables) {
        StateVariable v = spec;
        read_all("/states/" + spec.name, v.values, rows.begin, rows.size());
        c.variables.push_back(std::move(v));
    }
    for (const auto& name : h.measures) {
        Measure m{name, {}};
        read_all("/measures/" + name, m.values, rows.begin, rows.size());
        c.measures.push_back(std::move(m));
    }
    for (const auto& name : h.intensities) {
        Measure m{name, {}};
        read_all("/events/" + name, m.values, rows.begin, rows.size());
        c.event_intensities.push_back(std::move(m));
    }
    c.parameters = h.parameters;
    c.model_file = h.model_file;
    c.model_text = h.model_text;
    agree_or_throw(comm, fault);
    // Here, from the values as read: validation may rescale rounded dtmc rows.
    c.content_hash = chain_content_hash(c, comm);

    ValidationReport local;
    agree_or_throw(comm, validate_slice(c, file, options, local));
    ValidationReport total;
    MPI_Allreduce(&local.ctmc_self_loops, &total.ctmc_self_loops, 1, MPI_UINT64_T, MPI_SUM, comm);
    MPI_Allreduce(&local.explicit_zeros, &total.explicit_zeros, 1, MPI_UINT64_T, MPI_SUM, comm);
    MPI_Allreduce(&local.renormalized_rows, &total.renormalized_rows, 1, MPI_UINT64_T, MPI_SUM,
                  comm);
    MPI_Allreduce(&local.largest_correction, &total.largest_correction, 1, MPI_DOUBLE, MPI_MAX,
                  comm);
    if (report_out)
        *report_out = total;
    return c;
}

Chain read_whole_chain(const std::string& path, const ValidationOptions& options,
                       ValidationReport* report) {
    const ChainHeader h = read_chain_header(path, MPI_COMM_SELF);
    return read_chain_slice(h, {0, h.states}, MPI_COMM_SELF, options, report);
}

void write_chain_file(const std::string& path, const Chain& c, h5::Layout layout) {
    AtomicOutput out(path);
    {
        h5::Handle f = h5::create_for_writing(out.temporary(), std::nullopt);
        const std::string& file = path;
        h5::write_attribute(f, "schema", std::string(chain_schema), file);
        h5::write_attribute(f, "schema_version", chain_schema_version, file);
        h5::Handle g = h5::create_group(f, "chain", file);
        h5::write_attribute(g, "kind", to_string(c.kind), file);
        h5::write_attribute(g, "states", c.states, file);
        h5::write_attribute(g, "transitions", c.transitions, file);
        h5::write_whole(g, "offsets", c.offsets, file, layout);
        h5::write_whole(g, "targets", c.targets, file, layout);
        h5::write_whole(g, "weights", c.weights, file, layout);
        if (!c.events.empty()) {
            h5::write_whole(g, "events", c.events, file, layout);
            h5::write_attribute(g, "event_names", c.event_names, file);
        }
        if (!c.variables.empty()) {
            h5::Handle s = h5::create_group(f, "states", file);
            std::vector<std::string> order;
            for (const auto& v : c.variables) {
                order.push_back(v.name);
                if (v.integral) {
                    std::vector<std::int64_t> ints(v.values.begin(), v.values.end());
                    h5::write_whole(s, v.name, ints, file, layout);
                } else {
                    h5::write_whole(s, v.name, v.values, file, layout);
                }
                if (v.lower)
                    h5::write_attribute(s, v.name + ".lower", *v.lower, file);
                if (v.upper)
                    h5::write_attribute(s, v.name + ".upper", *v.upper, file);
            }
            h5::write_attribute(s, "order", order, file);
        }
        if (!c.measures.empty()) {
            h5::Handle m = h5::create_group(f, "measures", file);
            for (const auto& meas : c.measures)
                h5::write_whole(m, meas.name, meas.values, file, layout);
        }
        if (!c.event_intensities.empty()) {
            h5::Handle e = h5::create_group(f, "events", file);
            std::vector<std::string> order;
            for (const auto& ev : c.event_intensities) {
                order.push_back(ev.name);
                h5::write_whole(e, ev.name, ev.values, file, layout);
            }
            h5::write_attribute(e, "order", order, file);
        }
        if (!c.model_file.empty() || !c.model_text.empty() || !c.parameters.empty()) {
            h5::Handle m = h5::create_group(f, "model", file);
            h5::write_attribute(m, "file", c.model_file, file);
            h5::write_attribute(m, "text", c.model_text, file);
            if (!c.parameters.empty()) {
                h5::Handle p = create_ordered_group(m, "parameters", file);
                for (const auto& [name, value] : c.parameters)
                    h5::write_attribute(p, name, value, file);
            }
        }
        if (f.close() < 0)
            h5::fail(h5::Side::writing, path, "cannot finish writing the file (disk full?)");
    }
    out.commit();
}

} // namespace longrun::io
