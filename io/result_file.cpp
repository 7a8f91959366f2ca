#include "result_file.hpp"

#include "atomic_output.hpp"
#include "hdf5.hpp"
#include "mpi_agree.hpp"

namespace longrun::io {

namespace {

// Small datasets: every rank takes part in the collective call, rank 0 writes.
template <class T>
void write_small(hid_t loc, const std::string& name, const std::vector<T>& data, MPI_Comm comm,
                 const std::string& file) {
    h5::Handle d = h5::create_dataset(loc, name, h5::native_type<T>(), data.size(), file);
    const std::uint64_t count = comm_rank(comm) == 0 ? data.size() : 0;
    h5::write_range(d, h5::native_type<T>(), 0, count, data.data(), h5::Access::collective, file,
                    name);
}

} // namespace

void write_result_file(const std::string& path, MPI_Comm comm, const ResultContent& content,
                       RowRange rows, std::uint64_t states, const std::vector<double>& local,
                       const LocalClassData* local_classes) {
    AtomicOutput out(path, comm);
    std::optional<LocalFault> fault;
    try {
        h5::Handle f = h5::create_for_writing(out.temporary(), comm);
        const std::string& file = path;
        h5::write_attribute(f, "schema", std::string(result_schema), file);
        h5::write_attribute(f, "schema_version", result_schema_version, file);
        h5::write_attribute(f, "chain_path", content.origin.chain_path, file);
        h5::write_attribute(f, "chain_bytes", content.origin.chain_bytes, file);
        h5::write_attribute(f, "chain_mtime", content.origin.chain_mtime, file);
        if (!content.origin.chain_hash.empty()) {
            h5::write_attribute(f, "chain_hash", content.origin.chain_hash, file);
            h5::write_attribute(f, "chain_hash_method", content.origin.chain_hash_method, file);
        }
        h5::write_attribute(f, "tool_version", content.origin.tool_version, file);
        h5::write_attribute(f, "kind", content.origin.kind, file);
        if (content.has_distribution) {
            h5::Handle d = h5::create_dataset(f, "distribution", H5T_NATIVE_DOUBLE, states, file);
            h5::write_range(d, H5T_NATIVE_DOUBLE, rows.begin, rows.size(), local.data(),
                            h5::Access::collective, file, "/distribution");
        }
        if (content.classes && local_classes) {
            const auto& c = *content.classes;
            h5::Handle g = h5::create_group(f, "classes", file);
            write_small(g, "sizes", c.sizes, comm, file);
            write_small(g, "periods", c.periods, comm, file);
            write_small(g, "residuals", c.residuals, comm, file);
            if (!c.absorption.empty())
                write_small(g, "absorption", c.absorption, comm, file);
            if (!c.start.empty())
                h5::write_attribute(g, "start", c.start, file);
            h5::Handle ci = h5::create_dataset(g, "class_of", H5T_NATIVE_INT64, states, file);
            h5::write_range(ci, H5T_NATIVE_INT64, rows.begin, rows.size(),
                            local_classes->class_index.data(), h5::Access::collective, file,
                            "/classes/class_of");
            h5::Handle w = h5::create_dataset(g, "within", H5T_NATIVE_DOUBLE, states, file);
            h5::write_range(w, H5T_NATIVE_DOUBLE, rows.begin, rows.size(),
                            local_classes->within.data(), h5::Access::collective, file,
                            "/classes/within");
        }
        {
            const auto& c = content.certificate;
            h5::Handle g = h5::create_group(f, "certificate", file);
            h5::write_attribute(g, "method", c.method, file);
            h5::write_attribute(g, "strategy_trace",
                                c.trace.empty() ? std::vector<std::string>{""} : c.trace, file);
            h5::write_attribute(g, "iterations", c.iterations, file);
            h5::write_attribute(g, "residual", c.residual, file);
            h5::write_attribute(g, "residual_definition", c.residual_definition, file);
            h5::write_attribute(g, "tolerance", c.tolerance, file);
            h5::write_attribute(g, "error_estimate", c.error_estimate, file);
            h5::write_attribute(g, "error_estimate_method",
                                c.error_estimate_method.empty() ? std::string("none")
                                                                : c.error_estimate_method,
                                file);
            if (c.residual_tolerance > 0)
                h5::write_attribute(g, "residual_tolerance", c.residual_tolerance, file);
            h5::write_attribute(g, "norm_error", c.norm_error, file);
            h5::write_attribute(g, "min_entry", c.min_entry, file);
            h5::write_attribute(g, "clipped_mass", c.clipped_mass, file);
            h5::write_attribute(g, "wall_seconds", c.wall_seconds, file);
            h5::write_attribute(g, "peak_memory_bytes", c.peak_memory_bytes, file);
            h5::write_attribute(g, "ranks", static_cast<std::int64_t>(c.ranks), file);
            h5::write_attribute(g, "converged", static_cast<std::int64_t>(c.converged), file);
            if (c.detailed_balance_violation)
                h5::write_attribute(g, "detailed_balance_violation", *c.detailed_balance_violation,
                                    file);
        }
        {
            h5::Handle g = h5::create_group(f, "history", file);
            for (const auto& h : content.history)
                write_small(g, h.name, h.residuals, comm, file);
        }
        {
            h5::Handle s = h5::create_group(f, "summary", file);
            h5::Handle vars = h5::create_group(s, "variables", file);
            for (const auto& v : content.variables) {
                h5::Handle g = h5::create_group(vars, v.name, file);
                write_small(g, "values", v.values, comm, file);
                write_small(g, "pmf", v.pmf, comm, file);
                write_small(g, "tail", v.tail, comm, file);
                h5::write_attribute(g, "mean", v.mean, file);
                h5::write_attribute(g, "std", v.std, file);
                h5::write_attribute(g, "q50", v.q50, file);
                h5::write_attribute(g, "q90", v.q90, file);
                h5::write_attribute(g, "q99", v.q99, file);
                h5::write_attribute(g, "q999", v.q999, file);
                if (v.mass_at_lower)
                    h5::write_attribute(g, "mass_at_lower_bound", *v.mass_at_lower, file);
                if (v.mass_at_upper)
                    h5::write_attribute(g, "mass_at_upper_bound", *v.mass_at_upper, file);
            }
        }
        h5::close_written(f, path);
    } catch (const Error& e) {
        fault = LocalFault{0, e.code(), e.what()};
    }
    agree_or_throw(comm, fault);
    out.commit();
}

std::vector<double> read_result_distribution(const std::string& path) {
    h5::Handle f = h5::open_for_reading(path, std::nullopt);
    const std::string schema =
        h5::has_attribute(f, "schema") ? h5::read_string_attribute(f, "schema", path, "/") : "";
    if (schema != result_schema)
        h5::fail(h5::Side::reading, path, "not a longrun result file");
    h5::Handle d = h5::open_dataset(f, "/distribution", path);
    const auto n = h5::length_1d(d, path, "/distribution");
    return h5::read_range<double>(d, 0, n, h5::Access::serial, path, "/distribution");
}

} // namespace longrun::io
