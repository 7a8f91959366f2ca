#include "summary_file.hpp"

#include "atomic_output.hpp"
#include "hdf5.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <exception>
#include <filesystem>
#include <iterator>
#include <optional>
#include <system_error>

namespace longrun::io {

namespace {

// The parts write_summary owns; /summary/variables belongs to solve.
constexpr const char* replaced_parts[] = {"measures", "probabilities", "events", "likely_states"};
const std::vector<std::string> likely_state_datasets = {"index", "probability"};

std::string escaped(char c) {
    return fmt::format("%{:02X}", static_cast<unsigned char>(c));
}

std::string quantile_attribute(double level) {
    return fmt::format("q{}", level); // shortest text that reads back: q0.999
}

void require_result_schema(hid_t f, const std::string& path) {
    const std::string schema =
        h5::has_attribute(f, "schema") ? h5::read_string_attribute(f, "schema", path, "/") : "";
    if (schema != result_schema)
        h5::fail(h5::Side::reading, path,
                 schema.empty() ? "not a longrun result file (no root attribute 'schema')"
                                : "not a longrun result file (schema '" + schema + "', expected '" +
                                      result_schema + "')");
    const auto version = h5::read_u64_attribute(f, "schema_version", path, "/");
    if (version != result_schema_version)
        h5::fail(h5::Side::reading, path,
                 "result schema version " + std::to_string(version) +
                     " is not supported (this longrun reads version " +
                     std::to_string(result_schema_version) + ")");
}

h5::Handle create_copy(const std::string& temporary, const std::string& file) {
    h5::silence_library_errors();
    h5::Handle f(H5Fcreate(temporary.c_str(), H5F_ACC_EXCL, H5P_DEFAULT, H5P_DEFAULT), H5Fclose);
    if (!f.valid())
        h5::fail(h5::Side::writing, file,
                 "cannot create a temporary file next to it to add the summary (folder not "
                 "writable, or disk full?)");
    return f;
}

std::vector<std::string> members(hid_t group) {
    struct Collected {
        std::vector<std::string> names;
        std::exception_ptr failure;
    } collected;
    auto collect = [](hid_t, const char* name, const H5L_info_t*, void* out) -> herr_t {
        auto* to = static_cast<Collected*>(out);
        try { // no exception may unwind through HDF5's C frames
            to->names.emplace_back(name);
        } catch (...) {
            to->failure = std::current_exception();
            return -1;
        }
        return 0;
    };
    H5Literate(group, H5_INDEX_NAME, H5_ITER_INC, nullptr, collect, &collected);
    if (collected.failure)
        std::rethrow_exception(collected.failure);
    return collected.names;
}

// Attributes as stored (any type, variable-length strings included).
void copy_attributes(hid_t from, hid_t to, const std::string& file) {
    auto copy = [](hid_t loc, const char* name, const H5A_info_t*, void* target) -> herr_t {
        h5::Handle a(H5Aopen(loc, name, H5P_DEFAULT), H5Aclose);
        h5::Handle type(H5Aget_type(a), H5Tclose);
        h5::Handle space(H5Aget_space(a), H5Sclose);
        const hssize_t n = H5Sget_simple_extent_npoints(space);
        if (!a.valid() || !type.valid() || n < 0)
            return -1;
        std::vector<unsigned char> buffer;
        try { // no exception may unwind through HDF5's C frames
            buffer.resize(static_cast<std::size_t>(n) * H5Tget_size(type) + 1);
        } catch (...) {
            return -1;
        }
        if (H5Aread(a, type, buffer.data()) < 0)
            return -1;
        h5::Handle b(
            H5Acreate2(*static_cast<hid_t*>(target), name, type, space, H5P_DEFAULT, H5P_DEFAULT),
            H5Aclose);
        const herr_t status = b.valid() ? H5Awrite(b, type, buffer.data()) : -1;
        if (H5Tdetect_class(type, H5T_VLEN) > 0 || H5Tis_variable_str(type) > 0)
            H5Dvlen_reclaim(type, space, H5P_DEFAULT, buffer.data());
        return status;
    };
    hsize_t position = 0;
    if (H5Aiterate2(from, H5_INDEX_NAME, H5_ITER_INC, &position, copy, &to) < 0)
        h5::fail(h5::Side::writing, file, "cannot copy the attributes of the result");
}

void copy_object(hid_t from, const std::string& name, hid_t to, const std::string& file,
                 const std::string& where) {
    if (H5Ocopy(from, name.c_str(), to, name.c_str(), H5P_DEFAULT, H5P_DEFAULT) < 0)
        h5::fail(h5::Side::writing, file,
                 "cannot copy '" + where + name + "' into the new file (disk full?)");
}

// The result object by object, less the parts the summary replaces: deleting
// them in place would leave their space unused in the file, growing it with
// every summary.
void copy_result_without_summary(hid_t from, hid_t to, const std::string& file) {
    copy_attributes(from, to, file);
    for (const auto& name : members(from))
        if (name != "summary")
            copy_object(from, name, to, file, "/");
    h5::Handle summary = h5::create_group(to, "summary", file);
    if (!h5::exists(from, "/summary"))
        return;
    h5::Handle old = h5::open_group(from, "/summary", file);
    copy_attributes(old, summary, file);
    for (const auto& name : members(old))
        if (std::find(std::begin(replaced_parts), std::end(replaced_parts), name) ==
            std::end(replaced_parts))
            copy_object(old, name, summary, file, "/summary/");
}

void write_strings(hid_t loc, const std::string& name, const std::vector<std::string>& values,
                   const std::string& file) {
    h5::Handle type(H5Tcopy(H5T_C_S1), H5Tclose);
    H5Tset_size(type, H5T_VARIABLE);
    H5Tset_cset(type, H5T_CSET_UTF8);
    hsize_t n = values.size();
    h5::Handle space(H5Screate_simple(1, &n, nullptr), H5Sclose);
    h5::Handle d(H5Dcreate2(loc, name.c_str(), type, space, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT),
                 H5Dclose);
    if (!d.valid())
        h5::fail(h5::Side::writing, file, "cannot create dataset '" + name + "'");
    if (values.empty())
        return;
    std::vector<const char*> raw;
    for (const auto& v : values)
        raw.push_back(v.c_str());
    if (H5Dwrite(d, type, H5S_ALL, H5S_ALL, H5P_DEFAULT, raw.data()) < 0)
        h5::fail(h5::Side::writing, file, "cannot write dataset '" + name + "' (disk full?)");
}

std::vector<std::string> read_strings(hid_t loc, const std::string& object,
                                      const std::string& file) {
    h5::Handle d = h5::open_dataset(loc, object, file);
    const auto n = h5::length_1d(d, file, object);
    h5::Handle type(H5Dget_type(d), H5Tclose);
    if (H5Tget_class(type) != H5T_STRING || H5Tis_variable_str(type) <= 0)
        h5::fail(h5::Side::reading, file, "'" + object + "' is not a list of strings");
    std::vector<std::string> out;
    if (n == 0)
        return out;
    h5::Handle mem(H5Tcopy(H5T_C_S1), H5Tclose);
    H5Tset_size(mem, H5T_VARIABLE);
    H5Tset_cset(mem, H5Tget_cset(type));
    std::vector<char*> raw(n, nullptr);
    if (H5Dread(d, mem, H5S_ALL, H5S_ALL, H5P_DEFAULT, raw.data()) < 0)
        h5::fail(h5::Side::reading, file, "cannot read '" + object + "'");
    for (char* s : raw)
        out.emplace_back(s ? s : "");
    h5::Handle space(H5Dget_space(d), H5Sclose);
    H5Dvlen_reclaim(mem, space, H5P_DEFAULT, raw.data());
    return out;
}

std::vector<double> read_doubles(hid_t loc, const std::string& object, const std::string& file) {
    h5::Handle d = h5::open_dataset(loc, object, file);
    const auto n = h5::length_1d(d, file, object);
    return h5::read_range<double>(d, 0, n, h5::Access::serial, file, object);
}

std::optional<std::vector<std::string>> optional_list(hid_t loc, const std::string& name,
                                                      const std::string& file,
                                                      const std::string& object) {
    if (!h5::has_attribute(loc, name))
        return std::nullopt;
    return h5::read_string_list_attribute(loc, name, file, object);
}

std::optional<double> optional_f64(hid_t loc, const std::string& name, const std::string& file,
                                   const std::string& object) {
    if (!h5::has_attribute(loc, name))
        return std::nullopt;
    return h5::read_f64_attribute(loc, name, file, object);
}

// An empty list of names is not stored (HDF5 attributes of no elements are
// awkward for other tools); read back as empty.
void write_order(hid_t loc, const std::vector<std::string>& names, const std::string& file) {
    if (!names.empty())
        h5::write_attribute(loc, "order", names, file);
}

void write_measure(hid_t parent, const MeasureRecord& m, const std::string& file) {
    h5::Handle g = h5::create_group(parent, link_name(m.name), file);
    h5::write_attribute(g, "name", m.name, file);
    h5::write_attribute(g, "origin", m.origin, file);
    h5::write_attribute(g, "mean", m.mean, file);
    h5::write_attribute(g, "std", m.std, file);
    h5::write_attribute(g, "binned", static_cast<std::int64_t>(m.binned), file);
    h5::write_attribute(g, "integral", static_cast<std::int64_t>(m.integral), file);
    if (m.lower_bound)
        h5::write_attribute(g, "lower_bound", *m.lower_bound, file);
    if (m.upper_bound)
        h5::write_attribute(g, "upper_bound", *m.upper_bound, file);
    if (m.mass_at_lower)
        h5::write_attribute(g, "mass_at_lower_bound", *m.mass_at_lower, file);
    if (m.mass_at_upper)
        h5::write_attribute(g, "mass_at_upper_bound", *m.mass_at_upper, file);
    std::vector<double> levels, values;
    for (const auto& q : m.quantiles) {
        levels.push_back(q.level);
        values.push_back(q.value);
        h5::write_attribute(g, quantile_attribute(q.level), q.value, file);
    }
    h5::write_whole(g, "quantile_levels", levels, file);
    h5::write_whole(g, "quantile_values", values, file);
    if (m.mean_error_bound)
        h5::write_attribute(g, "mean_error_bound", *m.mean_error_bound, file);
    if (!m.quantiles.empty() && m.quantiles.front().resolved) {
        std::vector<std::uint64_t> marks;
        for (const auto& q : m.quantiles)
            marks.push_back(q.resolved.value_or(false) ? 1 : 0);
        h5::write_whole(g, "quantile_resolved", marks, file);
    }
    h5::write_whole(g, "values", m.values, file);
    h5::write_whole(g, "pmf", m.pmf, file);
    h5::write_whole(g, "tail", m.tail, file);
    if (m.given.empty())
        return;
    h5::Handle given = h5::create_group(g, "given", file);
    for (std::size_t k = 0; k < m.given.size(); ++k) {
        const auto& c = m.given[k];
        h5::Handle one = h5::create_group(given, std::to_string(k), file);
        h5::write_attribute(one, "condition", c.condition, file);
        h5::write_attribute(one, "probability", c.probability, file);
        if (c.mean)
            h5::write_attribute(one, "mean", *c.mean, file);
    }
}

MeasureRecord read_measure(hid_t f, const std::string& name, const std::string& file) {
    const std::string where = "/summary/measures/" + link_name(name);
    h5::Handle g = h5::open_group(f, where, file);
    MeasureRecord m;
    m.name = h5::read_string_attribute(g, "name", file, where);
    m.origin = h5::read_string_attribute(g, "origin", file, where);
    m.mean = h5::read_f64_attribute(g, "mean", file, where);
    m.std = h5::read_f64_attribute(g, "std", file, where);
    m.binned = h5::read_u64_attribute(g, "binned", file, where) != 0;
    m.integral = h5::read_u64_attribute(g, "integral", file, where) != 0;
    m.lower_bound = optional_f64(g, "lower_bound", file, where);
    m.upper_bound = optional_f64(g, "upper_bound", file, where);
    m.mass_at_lower = optional_f64(g, "mass_at_lower_bound", file, where);
    m.mass_at_upper = optional_f64(g, "mass_at_upper_bound", file, where);
    const auto levels = read_doubles(g, "quantile_levels", file);
    const auto values = read_doubles(g, "quantile_values", file);
    if (levels.size() != values.size())
        h5::fail(h5::Side::reading, file,
                 where + ": quantile_levels and quantile_values differ in length");
    for (std::size_t i = 0; i < levels.size(); ++i)
        m.quantiles.push_back({levels[i], values[i]});
    m.mean_error_bound = optional_f64(g, "mean_error_bound", file, where);
    if (h5::exists(g, "quantile_resolved")) {
        h5::Handle d = h5::open_dataset(g, "quantile_resolved", file);
        const auto marks =
            h5::read_range<std::uint64_t>(d, 0, h5::length_1d(d, file, where), h5::Access::serial,
                                          file, where + "/quantile_resolved");
        if (marks.size() != m.quantiles.size())
            h5::fail(h5::Side::reading, file,
                     where + ": quantile_resolved and quantile_levels differ in length");
        for (std::size_t i = 0; i < marks.size(); ++i)
            m.quantiles[i].resolved = marks[i] != 0;
    }
    m.values = read_doubles(g, "values", file);
    m.pmf = read_doubles(g, "pmf", file);
    m.tail = read_doubles(g, "tail", file);
    if (h5::exists(g, "given")) {
        for (std::size_t k = 0;; ++k) {
            const std::string one_path = "given/" + std::to_string(k);
            if (!h5::exists(g, one_path))
                break;
            h5::Handle one = h5::open_group(g, one_path, file);
            const std::string one_where = where + "/" + one_path;
            ConditionalRecord c;
            c.condition = h5::read_string_attribute(one, "condition", file, one_where);
            c.probability = h5::read_f64_attribute(one, "probability", file, one_where);
            c.mean = optional_f64(one, "mean", file, one_where);
            m.given.push_back(std::move(c));
        }
    }
    return m;
}

void write_parts(hid_t f, const SummaryRecord& s, const std::string& file) {
    h5::Handle summary = h5::open_group(f, "/summary", file);
    // Copied with /summary's other attributes; it belongs to this summary.
    if (h5::has_attribute(summary, "probability_error_bound") &&
        H5Adelete(summary, "probability_error_bound") < 0)
        h5::fail(h5::Side::writing, file, "cannot replace /summary's probability_error_bound");
    if (s.probability_error_bound)
        h5::write_attribute(summary, "probability_error_bound", *s.probability_error_bound, file);
    {
        h5::Handle g = h5::create_group(summary, "measures", file);
        std::vector<std::string> order;
        for (const auto& m : s.measures) {
            write_measure(g, m, file);
            order.push_back(m.name);
        }
        write_order(g, order, file);
    }
    {
        h5::Handle g = h5::create_group(summary, "probabilities", file);
        std::vector<std::string> names, conditions;
        std::vector<double> values;
        for (const auto& p : s.probabilities) {
            names.push_back(p.name);
            conditions.push_back(p.condition);
            values.push_back(p.probability);
        }
        write_strings(g, "names", names, file);
        write_strings(g, "conditions", conditions, file);
        h5::write_whole(g, "values", values, file);
    }
    {
        h5::Handle g = h5::create_group(summary, "events", file);
        h5::write_attribute(g, "unit", s.rate_unit, file);
        std::vector<std::string> order;
        for (const auto& e : s.events) {
            h5::Handle one = h5::create_group(g, link_name(e.name), file);
            h5::write_attribute(one, "name", e.name, file);
            h5::write_attribute(one, "rate", e.rate, file);
            h5::write_attribute(one, "source", e.source, file);
            h5::write_attribute(one, "expression", e.expression, file);
            if (e.error_bound)
                h5::write_attribute(one, "error_bound", *e.error_bound, file);
            order.push_back(e.name);
        }
        write_order(g, order, file);
    }
    {
        h5::Handle g = h5::create_group(summary, "likely_states", file);
        std::vector<std::uint64_t> index;
        std::vector<double> probability;
        std::vector<std::string> variables;
        if (!s.likely_states.empty())
            for (const auto& [name, value] : s.likely_states.front().variables)
                variables.push_back(name);
        std::vector<std::vector<double>> columns(variables.size());
        for (const auto& st : s.likely_states) {
            if (st.variables.size() != variables.size())
                h5::fail(h5::Side::writing, file,
                         "/summary/likely_states: the states do not all list the same variables");
            index.push_back(st.index);
            probability.push_back(st.probability);
            for (std::size_t v = 0; v < variables.size(); ++v)
                columns[v].push_back(st.variables[v].second);
        }
        h5::write_whole(g, "index", index, file);
        h5::write_whole(g, "probability", probability, file);
        for (std::size_t v = 0; v < variables.size(); ++v)
            h5::write_whole(g, link_name(variables[v], likely_state_datasets), columns[v], file);
        if (!variables.empty())
            h5::write_attribute(g, "variables", variables, file);
    }
}

void fill_copy(const std::string& result_path, const std::string& temporary,
               const SummaryRecord& summary) {
    h5::Handle source = h5::open_for_reading(result_path, std::nullopt);
    h5::Handle f = create_copy(temporary, result_path);
    copy_result_without_summary(source, f, result_path);
    source.close();
    write_parts(f, summary, result_path);
    if (f.close() < 0)
        h5::fail(h5::Side::writing, result_path, "cannot finish writing the summary (disk full?)");
    // The new file replaces the old one: it keeps its permissions.
    std::error_code ignored;
    std::filesystem::permissions(temporary, std::filesystem::status(result_path).permissions(),
                                 ignored);
}

} // namespace

std::string link_name(const std::string& name, const std::vector<std::string>& reserved) {
    if (name.empty())
        throw OutputError("an empty name cannot be stored in an HDF5 file");
    std::string out;
    for (char c : name)
        out += c == '%' || c == '/' ? escaped(c) : std::string(1, c);
    const bool is_reserved = std::find(reserved.begin(), reserved.end(), name) != reserved.end();
    if (name == "." || is_reserved)
        out = escaped(name.front()) + out.substr(1);
    return out;
}

void write_summary(const std::string& result_path, const SummaryRecord& summary) {
    {
        // Refused before anything is created beside it.
        h5::Handle f = h5::open_for_reading(result_path, std::nullopt);
        require_result_schema(f, result_path);
    }
    AtomicOutput out(result_path);
    try {
        fill_copy(result_path, out.temporary(), summary);
    } catch (const Error& e) {
        std::string message = e.what();
        if (message.rfind(result_path + ": ", 0) != 0)
            message = result_path + ": " + message;
        message += "; the result file is unchanged";
        if (e.code() == ExitCode::bad_input)
            throw InputError(message);
        throw OutputError(message);
    }
    out.commit();
}

SummaryRecord read_summary(const std::string& path) {
    h5::Handle f = h5::open_for_reading(path, std::nullopt);
    require_result_schema(f, path);
    SummaryRecord s;
    if (h5::exists(f, "/summary")) {
        h5::Handle g = h5::open_group(f, "/summary", path);
        s.probability_error_bound = optional_f64(g, "probability_error_bound", path, "/summary");
    }
    if (h5::exists(f, "/summary/measures")) {
        h5::Handle g = h5::open_group(f, "/summary/measures", path);
        for (const auto& name : optional_list(g, "order", path, "/summary/measures")
                                    .value_or(std::vector<std::string>{}))
            s.measures.push_back(read_measure(f, name, path));
    }
    if (h5::exists(f, "/summary/probabilities")) {
        h5::Handle g = h5::open_group(f, "/summary/probabilities", path);
        const auto names = read_strings(g, "names", path);
        const auto conditions = read_strings(g, "conditions", path);
        const auto values = read_doubles(g, "values", path);
        if (conditions.size() != names.size() || values.size() != names.size())
            h5::fail(h5::Side::reading, path,
                     "/summary/probabilities: names, conditions and values differ in length");
        for (std::size_t i = 0; i < names.size(); ++i)
            s.probabilities.push_back({names[i], conditions[i], values[i]});
    }
    if (h5::exists(f, "/summary/events")) {
        const std::string where = "/summary/events";
        h5::Handle g = h5::open_group(f, where, path);
        s.rate_unit = h5::read_string_attribute(g, "unit", path, where);
        for (const auto& name :
             optional_list(g, "order", path, where).value_or(std::vector<std::string>{})) {
            const std::string one_where = where + "/" + link_name(name);
            h5::Handle one = h5::open_group(f, one_where, path);
            EventRateRecord e;
            e.name = h5::read_string_attribute(one, "name", path, one_where);
            e.rate = h5::read_f64_attribute(one, "rate", path, one_where);
            e.source = h5::read_string_attribute(one, "source", path, one_where);
            e.expression = h5::read_string_attribute(one, "expression", path, one_where);
            e.error_bound = optional_f64(one, "error_bound", path, one_where);
            s.events.push_back(std::move(e));
        }
    }
    if (h5::exists(f, "/summary/likely_states")) {
        const std::string where = "/summary/likely_states";
        h5::Handle g = h5::open_group(f, where, path);
        std::vector<std::uint64_t> index;
        {
            h5::Handle d = h5::open_dataset(g, "index", path);
            index = h5::read_range<std::uint64_t>(d, 0, h5::length_1d(d, path, where + "/index"),
                                                  h5::Access::serial, path, where + "/index");
        }
        const auto probability = read_doubles(g, "probability", path);
        const auto variables =
            optional_list(g, "variables", path, where).value_or(std::vector<std::string>{});
        std::vector<std::vector<double>> columns;
        for (const auto& v : variables)
            columns.push_back(read_doubles(g, link_name(v, likely_state_datasets), path));
        for (std::size_t i = 0; i < index.size(); ++i) {
            if (i >= probability.size() ||
                std::any_of(columns.begin(), columns.end(),
                            [&](const auto& c) { return i >= c.size(); }))
                h5::fail(h5::Side::reading, path, where + ": datasets differ in length");
            LikelyStateRecord st;
            st.index = index[i];
            st.probability = probability[i];
            for (std::size_t v = 0; v < variables.size(); ++v)
                st.variables.emplace_back(variables[v], columns[v][i]);
            s.likely_states.push_back(std::move(st));
        }
    }
    return s;
}

ResultInfo read_result_info(const std::string& path) {
    ResultInfo info;
    info.path = path;
    h5::Handle f = h5::open_for_reading(path, std::nullopt);
    require_result_schema(f, path);
    auto& o = info.origin;
    o.chain_path = h5::read_string_attribute(f, "chain_path", path, "/");
    o.chain_bytes = h5::read_u64_attribute(f, "chain_bytes", path, "/");
    // Stored as i64; a double holds every second of the next 285 million years.
    o.chain_mtime = static_cast<std::int64_t>(h5::read_f64_attribute(f, "chain_mtime", path, "/"));
    o.kind = h5::read_string_attribute(f, "kind", path, "/");
    if (h5::has_attribute(f, "chain_hash")) {
        o.chain_hash = h5::read_string_attribute(f, "chain_hash", path, "/");
        if (h5::has_attribute(f, "chain_hash_method"))
            o.chain_hash_method = h5::read_string_attribute(f, "chain_hash_method", path, "/");
    }
    if (h5::has_attribute(f, "tool_version"))
        o.tool_version = h5::read_string_attribute(f, "tool_version", path, "/");

    {
        const std::string where = "/certificate";
        h5::Handle g = h5::open_group(f, where, path);
        auto& c = info.certificate;
        c.method = h5::read_string_attribute(g, "method", path, where);
        c.residual = h5::read_f64_attribute(g, "residual", path, where);
        c.tolerance = h5::read_f64_attribute(g, "tolerance", path, where);
        c.residual_definition = h5::read_string_attribute(g, "residual_definition", path, where);
        c.converged = h5::read_u64_attribute(g, "converged", path, where) != 0;
        c.iterations = h5::read_u64_attribute(g, "iterations", path, where);
        c.wall_seconds = h5::read_f64_attribute(g, "wall_seconds", path, where);
        c.ranks = static_cast<int>(h5::read_u64_attribute(g, "ranks", path, where));
        // The rest is informative: read when present.
        if (auto trace = optional_list(g, "strategy_trace", path, where))
            for (auto& step : *trace)
                if (!step.empty())
                    c.trace.push_back(std::move(step));
        c.norm_error = optional_f64(g, "norm_error", path, where).value_or(0);
        c.min_entry = optional_f64(g, "min_entry", path, where).value_or(0);
        c.clipped_mass = optional_f64(g, "clipped_mass", path, where).value_or(0);
        if (h5::has_attribute(g, "peak_memory_bytes"))
            c.peak_memory_bytes = h5::read_u64_attribute(g, "peak_memory_bytes", path, where);
        c.detailed_balance_violation = optional_f64(g, "detailed_balance_violation", path, where);
        info.error_estimate = optional_f64(g, "error_estimate", path, where);
        c.error_estimate = info.error_estimate.value_or(INFINITY);
        if (h5::has_attribute(g, "error_estimate_method"))
            c.error_estimate_method =
                h5::read_string_attribute(g, "error_estimate_method", path, where);
    }

    {
        h5::Handle g = h5::open_group(f, "/history", path);
        std::vector<std::string> names;
        auto collect = [](hid_t, const char* name, const H5L_info_t*, void* out) -> herr_t {
            static_cast<std::vector<std::string>*>(out)->emplace_back(name);
            return 0;
        };
        H5Literate(g, H5_INDEX_NAME, H5_ITER_INC, nullptr, collect, &names);
        // "<n>-<method>": by attempt number, so that "10-power" follows "9-linear".
        auto attempt = [](const std::string& name) {
            std::uint64_t n = 0;
            std::size_t i = 0;
            for (; i < name.size() && name[i] >= '0' && name[i] <= '9' && i < 18; ++i)
                n = n * 10 + static_cast<std::uint64_t>(name[i] - '0');
            return std::pair{i == 0 ? ~std::uint64_t{0} : n, name};
        };
        std::sort(names.begin(), names.end(),
                  [&](const auto& a, const auto& b) { return attempt(a) < attempt(b); });
        for (const auto& name : names)
            info.history.push_back({name, read_doubles(g, name, path)});
    }

    info.has_distribution = h5::exists(f, "/distribution");
    const char* sized_by = info.has_distribution ? "/distribution" : "/classes/class_of";
    if (!info.has_distribution && !h5::exists(f, sized_by))
        h5::fail(h5::Side::reading, path,
                 "neither /distribution nor /classes/class_of is present (not a complete result)");
    h5::Handle d = h5::open_dataset(f, sized_by, path);
    info.states = h5::length_1d(d, path, sized_by);
    return info;
}

} // namespace longrun::io
