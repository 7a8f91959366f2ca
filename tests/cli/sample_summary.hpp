// A summary built by hand from closed forms, for the plot and report tests, so
// that they need no solve: an M/M/c/K queue (Gross & Harris, Fundamentals of
// Queueing Theory, the M/M/c/K model) and a long M/M/1/K queue (Kleinrock,
// Queueing Systems I, sec. 3.6: p_n proportional to rho^n) for a measure with
// 5,000 values.
#pragma once

#include "cli/summarize_job.hpp"
#include "support/test_chains.hpp"

#include <cmath>
#include <string>
#include <vector>

namespace longrun::test {

// values 0..n-1 with probabilities p: pmf, tail, mean, std and the quantiles.
inline io::MeasureRecord measure_of(const std::string& name, const std::vector<double>& p,
                                    const std::vector<double>& levels) {
    io::MeasureRecord m;
    m.name = name;
    m.origin = "closed form";
    double tail = 1, mean = 0, second = 0;
    for (std::size_t n = 0; n < p.size(); ++n) {
        m.values.push_back(double(n));
        m.pmf.push_back(p[n]);
        m.tail.push_back(std::max(tail, 0.0));
        tail -= p[n];
        mean += n * p[n];
        second += double(n) * n * p[n];
    }
    m.mean = mean;
    m.std = std::sqrt(std::max(second - mean * mean, 0.0));
    for (double level : levels) {
        // Smallest x with P(X <= x) >= level (the definition in summary_record.hpp).
        double cdf = 0;
        std::size_t n = 0;
        for (; n + 1 < p.size(); ++n) {
            cdf += p[n];
            if (cdf >= level)
                break;
        }
        m.quantiles.push_back({level, double(n)});
    }
    return m;
}

inline constexpr const char* sample_model_text =
    "# ward <&> annex: beds \"shared\" & 'spare' (an invented scenario)\n"
    "name: ward <&> annex\n"
    "parameters: {arrival: 3.5, service: 1, beds: 4, room: 40}\n"
    "note: <script>alert('not run')</script>\n";

// `measures` of them, each on its own closed form.
inline cli::SummaryReport sample_summary_report() {
    const int c = 4, K = 40;
    const double lambda = 3.5, mu = 1;
    const std::vector<double> levels{0.5, 0.9, 0.99, 0.999};
    const auto p = testing_support::mmck_closed_form(c, K, lambda, mu);

    cli::SummaryReport r;
    r.result_path = "/data/ward-result.h5";
    r.chain_path = "/data/ward <&> annex.h5";
    r.kind = "ctmc";
    r.states = K + 1;
    r.transitions = 2 * K; // a birth below K, a death above 0
    r.model_file = "ward <&> annex.yaml";
    r.model_text = sample_model_text;
    r.parameters = {{"arrival", lambda}, {"service", mu}, {"beds", c}, {"room", K}};
    r.default_levels = levels;

    r.solve.method = "linear";
    r.solve.tolerance = 1e-10;
    r.solve.residual = 3e-13;
    r.solve.residual_definition = "||pi Q||_1 / max |q_ii|";
    r.solve.converged = true;
    r.solve.ranks = 2;
    r.solve.wall_seconds = 0.42;
    // Two attempts, the second tightened: residuals falling geometrically.
    for (int attempt = 0; attempt < 2; ++attempt) {
        io::HistoryRecord h{attempt == 0 ? "1-linear" : "2-linear <tight>", {}};
        for (int i = 0; i < (attempt == 0 ? 12 : 6); ++i)
            h.residuals.push_back(std::pow(10.0, -1 - attempt * 9 - 0.8 * i));
        r.solve.iterations += h.residuals.size();
        r.solve.history.push_back(h);
    }

    auto in_system = measure_of("in_system", p, levels);
    in_system.origin = "state variable";
    in_system.lower_bound = 0;
    in_system.upper_bound = K;
    in_system.mass_at_lower = p[0];
    in_system.mass_at_upper = p[K];
    in_system.given.push_back({"in_system>=beds", 0, std::nullopt});
    {
        double mass = 0, weighted = 0;
        for (int n = c; n <= K; ++n) {
            mass += p[n];
            weighted += n * p[n];
        }
        in_system.given.back().probability = mass;
        in_system.given.back().mean = weighted / mass;
    }
    r.summary.measures.push_back(in_system);

    std::vector<double> waiting(K - c + 1, 0.0);
    for (int n = 0; n <= K; ++n)
        waiting[std::max(n - c, 0)] += p[n];
    auto waiting_measure = measure_of("waiting <&> room", waiting, levels);
    waiting_measure.origin = "--measure \"waiting <&> room=max(in_system-beds,0)\"";
    r.summary.measures.push_back(waiting_measure);

    double all_busy = 0;
    for (int n = c; n <= K; ++n)
        all_busy += p[n];
    r.summary.measures.push_back(measure_of("all_busy", {1 - all_busy, all_busy}, levels));

    // M/M/1/K, K = 4999, rho = 0.999: p_n = (1 - rho) rho^n / (1 - rho^(K+1)).
    const int long_K = 4999;
    const double rho = 0.999;
    std::vector<double> long_queue(long_K + 1);
    for (int n = 0; n <= long_K; ++n)
        long_queue[n] = (1 - rho) * std::pow(rho, n) / (1 - std::pow(rho, long_K + 1));
    r.summary.measures.push_back(measure_of("residuals", long_queue, levels));

    r.summary.probabilities.push_back({"full", "in_system==room", p[K]});
    r.summary.probabilities.push_back({"in_system>=8", "in_system>=8", 0});
    for (int n = 8; n <= K; ++n)
        r.summary.probabilities.back().probability += p[n];
    r.summary.rate_unit = "per unit time";
    // Lost arrivals: lambda P(full); admitted: lambda (1 - P(full)) (PASTA).
    r.summary.events.push_back({"lost", "", lambda * p[K], "transition labels"});
    r.summary.events.push_back({"admitted", "", lambda * (1 - p[K]), "transition labels"});
    r.summary.events.push_back({"lost_fraction", "lost/(lost+admitted)", p[K], "--rate"});
    for (int n : {3, 4, 2})
        r.summary.likely_states.push_back({std::uint64_t(n), p[n], {{"in_system", n}}});
    r.warnings.push_back("in_system: mass at the upper bound 40 is above 1e-06 <check>");
    return r;
}

} // namespace longrun::test
