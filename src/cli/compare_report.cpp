#include "compare_report.hpp"

#include <fmt/format.h>

#include <filesystem>

namespace longrun::cli {

namespace {

double mib(std::uint64_t bytes) {
    return static_cast<double>(bytes) / (1024.0 * 1024.0);
}

const CompareChain* chain_of(const CompareReport& report, const std::string& path) {
    for (const auto& c : report.chains)
        if (c.path == path)
            return &c;
    return nullptr;
}

std::string yes_no(const CompareRun& run) {
    switch (run.status) {
    case RunStatus::converged:
        return "yes";
    case RunStatus::not_converged:
        return "no";
    default:
        return "-";
    }
}

std::string csv_field(const std::string& text) {
    if (text.find_first_of(",\"\n\r") == std::string::npos)
        return text;
    std::string quoted = "\"";
    for (char ch : text)
        quoted += ch == '"' ? std::string("\"\"") : std::string(1, ch);
    return quoted + "\"";
}

bool ran(const CompareRun& run) {
    return run.status == RunStatus::converged || run.status == RunStatus::not_converged ||
           run.status == RunStatus::failed;
}

} // namespace

std::string compare_text(const CompareReport& r) {
    std::string out = fmt::format("tolerance    {:.1e} on the estimated error ||pi_hat - pi||_1, "
                                  "every method alone, {} rank(s)\n",
                                  r.tolerance, r.ranks);
    for (const auto& c : r.chains) {
        out += fmt::format(
            "\nchain        {}: {}{}, {} states, {} transitions\n", c.path, io::to_string(c.kind),
            c.kind_detected ? (c.transposed ? " (told from column sums)" : " (told from row sums)")
            : c.transposed  ? " (read transposed)"
                            : "",
            c.states, c.transitions);
        out += fmt::format("structure    {}\n", c.structure);
        if (c.solvable)
            out += fmt::format("product      one product with the matrix takes {:.3g} ms\n",
                               c.product_seconds * 1e3);
        out += fmt::format("\n{:<13} {:>4} {:>6} {:>9} {:>10} {:>9} {:>9} {:>10} {:>10}  {}\n",
                           "method", "conv", "iters", "products", "prod-equiv", "seconds",
                           "peak MiB", "est. error", "residual", "outcome");
        for (const auto& run : r.runs) {
            if (run.chain != c.path)
                continue;
            if (!ran(run)) {
                out +=
                    fmt::format("{:<13} {:>4} {:>6} {:>9} {:>10} {:>9} {:>9} {:>10} {:>10}  {}\n",
                                run.method, "-", "-", "-", "-", "-", "-", "-", "-", run.outcome);
                continue;
            }
            out += fmt::format(
                "{:<13} {:>4} {:>6} {:>9} {:>10.0f} {:>9.3g} {:>9.0f} {:>10} {:>10}  {}\n",
                run.method, yes_no(run), run.iterations, run.matvecs, run.product_equivalents,
                run.seconds, mib(run.peak_memory_bytes),
                run.error_estimate ? fmt::format("{:.2e}", *run.error_estimate) : "-",
                run.residual ? fmt::format("{:.2e}", *run.residual) : "-", run.outcome);
        }
    }
    out += fmt::format("\nproducts: PETSc products with the chain's matrix (those inside hypre or "
                       "MUMPS are not counted);\nprod-equiv: wall seconds / one product's time; "
                       "peak MiB: the process's peak memory after the run (largest rank).\n");
    return out;
}

nlohmann::json compare_json(const CompareReport& r) {
    nlohmann::json j;
    j["tolerance"] = r.tolerance;
    j["ranks"] = r.ranks;
    j["methods"] = r.methods;
    j["wall_seconds"] = r.wall_seconds;
    nlohmann::json chains = nlohmann::json::array();
    for (const auto& c : r.chains)
        chains.push_back({{"path", c.path},
                          {"kind", io::to_string(c.kind)},
                          {"kind_detected", c.kind_detected},
                          {"transposed", c.transposed},
                          {"states", c.states},
                          {"transitions", c.transitions},
                          {"structure", c.structure},
                          {"unique_stationary_distribution", c.solvable},
                          {"product_seconds", c.product_seconds},
                          {"residual_definition", c.residual_definition}});
    j["chains"] = chains;
    nlohmann::json runs = nlohmann::json::array();
    for (const auto& run : r.runs) {
        nlohmann::json row = {{"chain", run.chain},
                              {"method", run.method},
                              {"status", to_string(run.status)},
                              {"converged", run.status == RunStatus::converged},
                              {"iterations", run.iterations},
                              {"matvecs", run.matvecs},
                              {"product_equivalents", run.product_equivalents},
                              {"wall_seconds", run.seconds},
                              {"peak_memory_bytes", run.peak_memory_bytes},
                              {"peak_memory_increase_bytes", run.peak_memory_increase_bytes},
                              {"residual", nullptr},
                              {"error_estimate", nullptr},
                              {"outcome", run.outcome},
                              {"history", run.history},
                              {"history_seconds", run.history_seconds}};
        if (run.residual)
            row["residual"] = *run.residual;
        if (run.error_estimate)
            row["error_estimate"] = *run.error_estimate;
        runs.push_back(std::move(row));
    }
    j["runs"] = runs;
    return j;
}

std::string compare_csv(const CompareReport& r) {
    std::string out = "chain,kind,states,transitions,method,status,converged,iterations,matvecs,"
                      "product_equivalents,wall_seconds,peak_memory_bytes,"
                      "peak_memory_increase_bytes,residual,error_estimate,tolerance,outcome\n";
    for (const auto& run : r.runs) {
        const CompareChain* c = chain_of(r, run.chain);
        out += fmt::format("{},{},{},{},{},{},{},{},{},{:.6g},{:.6g},{},{},{},{},{:.3g},{}\n",
                           csv_field(run.chain), c ? io::to_string(c->kind) : "", c ? c->states : 0,
                           c ? c->transitions : 0, csv_field(run.method), to_string(run.status),
                           run.status == RunStatus::converged ? "true" : "false", run.iterations,
                           run.matvecs, run.product_equivalents, run.seconds, run.peak_memory_bytes,
                           run.peak_memory_increase_bytes,
                           run.residual ? fmt::format("{:.6e}", *run.residual) : "",
                           run.error_estimate ? fmt::format("{:.6e}", *run.error_estimate) : "",
                           r.tolerance, csv_field(run.outcome));
    }
    return out;
}

} // namespace longrun::cli
