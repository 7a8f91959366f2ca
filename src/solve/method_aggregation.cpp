// `aggregation`: multilevel iterative aggregation-disaggregation on the singular
// system A x = 0 (A = Q^T for a ctmc, P^T - I for a dtmc). Options prefix:
// -aggregation_.
//
// We follow the multilevel aggregation cycle of De Sterck, Manteuffel,
// McCormick, Nguyen and Ruge, "Multilevel adaptive aggregation for Markov
// chains, with application to web ranking", SIAM J. Sci. Comput. 30(5), 2008,
// which generalises the two-level scheme to many levels as Horton and
// Leutenegger, "A multi-level solution algorithm for steady-state Markov
// chains", SIGMETRICS 1994, did: relax, aggregate with the current iterate as
// disaggregation weights (A_c = R A diag(x) P, R aggregate sums, P the 0/1
// prolongation), solve the coarse singular problem for one factor per
// aggregate, scale the iterate by those factors, relax again. A_c has zero
// column sums and non-negative off-diagonals whenever x > 0, so every level is
// again a chain and Gauss-Seidel keeps the iterate positive. Where probabilities
// underflow to 0 (a long queue's tail) the weights are lifted to a floor relative
// to the level (-aggregation_floor), so x > 0 holds for the coarse operators too.
#include "aggregation_grouping.hpp"
#include "aggregation_recombination.hpp"
#include "gth.hpp"
#include "method.hpp"

#include "error_goal.hpp"

#include "io/error.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <memory>

namespace longrun::solve {

namespace {

struct AggregationOptions {
    bool w_cycle = true;
    PetscInt pre_sweeps = 1, post_sweeps = 1;
    PetscInt max_cycles = 500;
    PetscInt coarse_size = 100;   // below this many states: direct (GTH) solve
    PetscInt direct_limit = 2500; // the coarsest level is solved by GTH up to this size
    PetscInt max_levels = 40;
    PetscInt window = 4;        // iterates recombined at the top level (1: none)
    PetscInt stall_cycles = 15; // cycles without a 1 % gain before giving up
    PetscReal strength = 0.25;  // theta of strong connections
    PetscReal variable_strength = 0.1;
    PetscReal max_coarse_ratio = 0.85; // coarsening that keeps more than this stops
    // Coarse operators weight with max(x, floor * max x) (CoarseOperator::numeric).
    // 1e-200: far below any probability that moves the residual (the lift changes it
    // by at most 2 max|a_ii| floor per state), far above the double range's end, so
    // that rates times weights, GTH's ratios and the sweeps' quotients on coarse
    // levels (bounded by about 1/floor) stay finite.
    PetscReal floor_ratio = 1e-200;
    std::string grouping = "auto"; // auto | coordinates | strength
};

AggregationOptions read_options() {
    AggregationOptions o;
    const char* prefix = "aggregation_";
    char text[64] = {};
    PetscBool set = PETSC_FALSE;
    check(PetscOptionsGetString(nullptr, prefix, "-cycle", text, sizeof text, &set),
          "PetscOptionsGetString");
    if (set) {
        const std::string cycle = text;
        if (cycle != "v" && cycle != "w")
            throw UsageError("-aggregation_cycle must be v or w, not '" + cycle + "'");
        o.w_cycle = cycle == "w";
    }
    check(PetscOptionsGetString(nullptr, prefix, "-grouping", text, sizeof text, &set),
          "PetscOptionsGetString");
    if (set) {
        o.grouping = text;
        if (o.grouping != "auto" && o.grouping != "coordinates" && o.grouping != "strength")
            throw UsageError("-aggregation_grouping must be auto, coordinates or strength");
    }
    auto get_int = [&](const char* name, PetscInt& v, PetscInt least) {
        check(PetscOptionsGetInt(nullptr, prefix, name, &v, nullptr), "PetscOptionsGetInt");
        if (v < least)
            throw UsageError(fmt::format("-aggregation_{} must be at least {}", name + 1, least));
    };
    get_int("-pre_sweeps", o.pre_sweeps, 0);
    get_int("-post_sweeps", o.post_sweeps, 0);
    get_int("-max_cycles", o.max_cycles, 1);
    get_int("-coarse_size", o.coarse_size, 1);
    get_int("-direct_limit", o.direct_limit, 1);
    get_int("-max_levels", o.max_levels, 1);
    get_int("-stall_cycles", o.stall_cycles, 1);
    get_int("-window", o.window, 1);
    check(PetscOptionsGetReal(nullptr, prefix, "-strength", &o.strength, nullptr),
          "PetscOptionsGetReal");
    check(PetscOptionsGetReal(nullptr, prefix, "-variable_strength", &o.variable_strength, nullptr),
          "PetscOptionsGetReal");
    check(PetscOptionsGetReal(nullptr, prefix, "-max_coarse_ratio", &o.max_coarse_ratio, nullptr),
          "PetscOptionsGetReal");
    check(PetscOptionsGetReal(nullptr, prefix, "-floor", &o.floor_ratio, nullptr),
          "PetscOptionsGetReal");
    if (!(o.floor_ratio >= 0 && o.floor_ratio < 1))
        throw UsageError("-aggregation_floor must be at least 0 and below 1");
    return o;
}

class Hierarchy {
  public:
    Hierarchy(AggregationLevel finest, const AggregationOptions& o, bool use_coordinates,
              std::vector<std::string>& notes)
        : finest_(std::move(finest)), options_(o) {
        AggregationLevel* current = &finest_;
        bool by_coordinates = use_coordinates;
        std::string sizes = std::to_string(current->global);
        while (static_cast<PetscInt>(operators_.size()) + 1 < o.max_levels &&
               current->global > o.coarse_size) {
            Grouping g = by_coordinates ? group_by_coordinates(*current, o.variable_strength)
                                        : group_by_strength(*current, o.strength);
            PetscInt total = 0;
            MPI_Allreduce(&g.count, &total, 1, MPIU_INT, MPI_SUM, current->comm);
            if (by_coordinates && total > o.max_coarse_ratio * current->global) {
                // The variables are used up (or say nothing about this level):
                // continue from the matrix alone.
                by_coordinates = false;
                g = group_by_strength(*current, o.strength);
                MPI_Allreduce(&g.count, &total, 1, MPIU_INT, MPI_SUM, current->comm);
            }
            // A single aggregate carries no information (its factor is arbitrary).
            if (total > o.max_coarse_ratio * current->global || total < 2)
                break;
            notes.push_back(fmt::format("level {}: {} states -> {} aggregates by {}",
                                        operators_.size(), current->global, total, g.how));
            const bool keep_coordinates = by_coordinates;
            auto coordinates = std::move(g.coordinates);
            operators_.push_back(
                std::make_unique<CoarseOperator>(*current, std::move(g.aggregate), g.count));
            // The next grouping judges strength from this level's values, so they
            // must exist: weights from the iterate the hierarchy is built with.
            operators_.back()->numeric(*current, o.floor_ratio);
            current = &operators_.back()->coarse();
            check(VecSet(current->x, 1.0), "VecSet");
            if (keep_coordinates)
                current->coordinates = std::move(coordinates);
            sizes += " -> " + std::to_string(current->global);
        }
        direct_ = current->global <= o.direct_limit;
        notes.push_back(fmt::format("{} levels: {} states; coarsest solved by {}", levels(), sizes,
                                    direct_ ? "GTH elimination" : "Gauss-Seidel sweeps"));
    }

    int levels() const { return static_cast<int>(operators_.size()) + 1; }
    AggregationLevel& finest() { return finest_; }
    AggregationLevel& level(int l) { return l == 0 ? finest_ : operators_[l - 1]->coarse(); }

    void cycle(int l) {
        const auto started = std::chrono::steady_clock::now();
        visit(l);
        inclusive_seconds_.resize(static_cast<std::size_t>(levels()), 0.0);
        inclusive_seconds_[l] +=
            std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();
    }

    // Seconds spent on each level itself (coarser levels excluded), for the notes.
    std::string seconds_per_level() const {
        std::string text;
        for (std::size_t l = 0; l < inclusive_seconds_.size(); ++l) {
            const double below = l + 1 < inclusive_seconds_.size() ? inclusive_seconds_[l + 1] : 0;
            text += fmt::format("{}{:.3f}", l ? ", " : "", inclusive_seconds_[l] - below);
        }
        return text;
    }

  private:
    void visit(int l) {
        AggregationLevel& here = level(l);
        if (l + 1 == levels()) {
            solve_coarsest(here);
            return;
        }
        for (PetscInt k = 0; k < options_.pre_sweeps; ++k)
            here.sweep(true);
        CoarseOperator& op = *operators_[l];
        op.numeric(here, options_.floor_ratio);
        check(VecSet(op.coarse().x, 1.0), "VecSet"); // the factors start at "no change"
        const int visits = options_.w_cycle ? 2 : 1;
        for (int v = 0; v < visits; ++v)
            cycle(l + 1);
        op.prolong(here);
        for (PetscInt k = 0; k < options_.post_sweeps; ++k)
            here.sweep(false);
    }

    // The coarsest level is small: every rank gathers it whole and solves it
    // with GTH (the same data gives the same answer everywhere).
    void solve_coarsest(AggregationLevel& c) {
        if (!direct_) {
            for (int k = 0; k < 10; ++k) {
                c.sweep(true);
                c.sweep(false);
            }
            return;
        }
        // Generator of the coarse chain: Q_c[J][I] = A_c[I][J], as (source, target, rate).
        std::vector<double> mine;
        for (PetscInt I = 0; I < c.local; ++I) {
            for (PetscInt k = c.owned.row_start[I]; k < c.owned.row_start[I + 1]; ++k)
                if (c.owned.column[k] != I)
                    mine.insert(mine.end(), {double(c.begin + c.owned.column[k]),
                                             double(c.begin + I), c.owned.value[k]});
            for (PetscInt k = c.ghost.row_start[I]; k < c.ghost.row_start[I + 1]; ++k)
                mine.insert(mine.end(), {double(c.ghost_global[c.ghost.column[k]]),
                                         double(c.begin + I), c.ghost.value[k]});
        }
        int size = 1;
        MPI_Comm_size(c.comm, &size);
        int count = static_cast<int>(mine.size());
        std::vector<int> counts(size), displs(size, 0);
        MPI_Allgather(&count, 1, MPI_INT, counts.data(), 1, MPI_INT, c.comm);
        for (int r = 1; r < size; ++r)
            displs[r] = displs[r - 1] + counts[r - 1];
        std::vector<double> all(static_cast<std::size_t>(displs.back() + counts.back()));
        MPI_Allgatherv(mine.data(), count, MPI_DOUBLE, all.data(), counts.data(), displs.data(),
                       MPI_DOUBLE, c.comm);
        const auto n = static_cast<std::uint64_t>(c.global);
        std::vector<std::uint64_t> offsets(n + 1, 0), targets;
        std::vector<double> weights;
        const std::size_t entries = all.size() / 3;
        std::vector<std::size_t> order(entries);
        for (std::size_t e = 0; e < entries; ++e)
            order[e] = e;
        std::sort(order.begin(), order.end(), [&](std::size_t p, std::size_t q) {
            return std::pair(all[3 * p], all[3 * p + 1]) < std::pair(all[3 * q], all[3 * q + 1]);
        });
        std::pair<double, double> previous{-1, -1};
        for (std::size_t e : order) {
            const std::pair<double, double> at{all[3 * e], all[3 * e + 1]};
            if (at == previous) { // one coarse jump reached from several ranks' entries
                weights.back() += all[3 * e + 2];
                continue;
            }
            previous = at;
            targets.push_back(static_cast<std::uint64_t>(at.second));
            weights.push_back(all[3 * e + 2]);
            ++offsets[static_cast<std::uint64_t>(at.first) + 1];
        }
        for (std::uint64_t i = 0; i < n; ++i)
            offsets[i + 1] += offsets[i];
        LocalRows rows{TimeModel::continuous, n, RowRange{0, n}, offsets, targets, weights};
        std::vector<double> pi;
        try {
            pi = gth_stationary(rows);
        } catch (Error& e) {
            // Every rank eliminated the same gathered chain and failed alike: the
            // strategy may go on to its next method without a rank left waiting.
            e.mark_agreed();
            throw;
        }
        PetscScalar* y = nullptr;
        check(VecGetArray(c.x, &y), "VecGetArray");
        for (PetscInt I = 0; I < c.local; ++I)
            y[I] = pi[c.begin + I] * static_cast<double>(n); // factors of mean 1
        check(VecRestoreArray(c.x, &y), "VecRestoreArray");
    }

    AggregationLevel finest_;
    std::vector<std::unique_ptr<CoarseOperator>> operators_;
    AggregationOptions options_;
    bool direct_ = false;
    std::vector<double> inclusive_seconds_;
};

// Collective: true on every rank when every rank has the variables of its rows.
bool coordinates_usable(const MethodSettings& s, PetscInt local, MPI_Comm comm) {
    int mine = s.coordinates && !s.coordinates->values.empty() ? 1 : 0;
    if (mine)
        for (const auto& v : s.coordinates->values)
            mine = mine && static_cast<PetscInt>(v.size()) == local;
    int all = 0;
    MPI_Allreduce(&mine, &all, 1, MPI_INT, MPI_MIN, comm);
    return all == 1;
}

// A x (A = Q^T or P^T - I) into r, without allocating (one product).
void residual_vector(const TransposedChain& a, Vec x, Vec r) {
    check(MatMult(a.matrix, x, r), "MatMult");
    if (a.time == TimeModel::discrete)
        check(VecAXPY(r, -1.0, x), "VecAXPY");
}

double norm_1(Vec v) {
    PetscReal n = 0;
    check(VecNorm(v, NORM_1, &n), "VecNorm");
    return n;
}

void normalise(Vec x) {
    PetscScalar total = 0;
    check(VecSum(x, &total), "VecSum");
    if (total != 0 && std::isfinite(total))
        check(VecScale(x, 1.0 / total), "VecScale");
}

} // namespace

Attempt run_aggregation(const TransposedChain& a, Vec warm_start, const MethodSettings& s) {
    Attempt attempt;
    attempt.method = "aggregation";
    const AggregationOptions o = read_options();
    if (s.progress)
        s.progress->begin("aggregation", s.tolerance);

    const auto setup_start = std::chrono::steady_clock::now();
    AggregationLevel finest = finest_level(a);
    bool use_coordinates = false;
    if (o.grouping != "strength")
        use_coordinates = coordinates_usable(s, finest.local, finest.comm);
    if (o.grouping == "coordinates" && !use_coordinates)
        attempt.notes.push_back("no state variables known: grouping by strong connections");
    if (use_coordinates)
        finest.coordinates = s.coordinates->values;
    // Start: the warm start with its (clipped) zeros and negatives lifted to a
    // tiny positive value, since the coarse operators need x > 0 (the sweeps
    // put the right value there); else uniform.
    if (warm_start) {
        check(VecCopy(warm_start, finest.x), "VecCopy");
        PetscScalar* x = nullptr;
        check(VecGetArray(finest.x, &x), "VecGetArray");
        for (PetscInt i = 0; i < finest.local; ++i)
            if (!(x[i] > 0))
                x[i] = 1e-300;
        check(VecRestoreArray(finest.x, &x), "VecRestoreArray");
    } else {
        check(VecSet(finest.x, 1.0 / static_cast<double>(a.states)), "VecSet");
    }
    normalise(finest.x);
    Hierarchy h(std::move(finest), o, use_coordinates, attempt.notes);
    AggregationLevel& top = h.finest();

    const double setup_seconds =
        std::chrono::duration<double>(std::chrono::steady_clock::now() - setup_start).count();

    std::string stopped = fmt::format("the cycle limit ({})", o.max_cycles);
    double best = INFINITY;
    long since_gain = 0;
    VecHandle candidate = create_state_vector(a);
    long cycle = 0;
    IterantRecombination recombination(top.x, static_cast<int>(o.window));
    ErrorGoal goal(s);
    VecHandle r = create_state_vector(a), combined_x = create_state_vector(a),
              combined_r = create_state_vector(a);
    const double scale = a.time == TimeModel::discrete ? 1.0 : a.uniformisation;
    while (cycle < o.max_cycles) {
        h.cycle(0);
        ++cycle;
        normalise(top.x);
        // The residual vector of every cycle's output feeds the recombination;
        // the residual recorded is the certificate's (residual_of's formula), of
        // the iterate the next cycle starts from.
        residual_vector(a, top.x, r);
        double residual = norm_1(r) / scale;
        recombination.push(top.x, r);
        const auto outcome = recombination.combine(combined_x, combined_r);
        if (outcome != IterantRecombination::Outcome::none) {
            normalise(combined_x); // sums to 1 already unless entries were lifted
            // Lifting entries by delta changes the residual by A delta, and
            // ||A delta||_1 <= 2 max_i |a_ii| ||delta||_1: an upper bound instead
            // of one more product (the lifted entries are tiny ones).
            const double r_combined = norm_1(combined_r) / scale + 2 * recombination.lifted_mass();
            if (r_combined < residual) {
                check(VecCopy(combined_x, top.x), "VecCopy");
                residual = r_combined;
            }
        }
        record_iteration(attempt, cycle, residual, s);
        attempt.iterations = cycle;
        if (s.checkpoint && s.checkpoint->due())
            s.checkpoint->save(top.x, "aggregation", cycle);
        if (!std::isfinite(residual)) {
            stopped = "a non-finite residual";
            break;
        }
        if (residual <= goal.residual_target()) {
            check(VecCopy(top.x, candidate), "VecCopy");
            Certificate c = certify(a, candidate);
            const bool done = goal.judge(candidate, c);
            keep_if_better(attempt, a, candidate, c);
            if (done) {
                stopped = goal.gave_up() ? goal.stop_reason() : "the certificate is met";
                break;
            }
            // The next step of the refinement sequence starts from here.
            best = residual;
            since_gain = 0;
        }
        if (residual < 0.99 * best) {
            best = residual;
            since_gain = 0;
        } else if (++since_gain >= o.stall_cycles) {
            stopped = fmt::format("stagnation ({} cycles without gain)", o.stall_cycles);
            break;
        }
    }
    if (!attempt.certificate.meets(s.tolerance, s.residual_tolerance)) {
        check(VecCopy(top.x, candidate), "VecCopy");
        const Certificate c = certify(a, candidate);
        keep_if_better(attempt, a, candidate, c);
    }
    attempt.notes.push_back(
        fmt::format("{}-cycles, {} pre / {} post Gauss-Seidel sweeps, recombination window {}: "
                    "{} cycles, stopped by {}; set-up {:.3f} s; corrections {}",
                    o.w_cycle ? "W" : "V", o.pre_sweeps, o.post_sweeps, o.window, cycle, stopped,
                    setup_seconds, goal.summary()));
    attempt.notes.push_back("seconds per level, finest first: " + h.seconds_per_level());
    if (s.progress)
        s.progress->note("aggregation: " + attempt.notes[attempt.notes.size() - 2]);
    return attempt;
}

} // namespace longrun::solve
