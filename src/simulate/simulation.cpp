#include "simulation.hpp"

#include "batch_means.hpp"
#include "model/model.hpp"
#include "sampler.hpp"

#include <algorithm>
#include <bit>
#include <chrono>
#include <cmath>
#include <random>
#include <stdexcept>

namespace longrun::simulate {

// What a replication estimates and where each quantity's value per state lives.
struct PreparedChain {
    explicit PreparedChain(const io::Chain& c) : chain(c), sampler(c) {}

    const io::Chain& chain;
    Sampler sampler;
    std::vector<std::string> names, kinds;
    // The time-weighted quantities (variables, measures, events with intensities):
    // `weighted` values per state, row-major, so that one state's values share a
    // cache line.
    std::size_t weighted = 0;
    std::vector<double> table;
    // Per transition label (and Sampler::no_label): its accumulator (counts of
    // firings), or -1 when there is none or the event is already estimated from
    // its intensities.
    std::vector<std::int64_t> label_slot;
    bool labelled = false;
};

namespace {

// A stream that is a pure function of (seed, index): std::seed_seq spreads the
// four 32-bit words over the whole Mersenne Twister state, so neighbouring
// indices give unrelated streams, and both algorithms are fixed by the C++
// standard, so the same (seed, index) gives the same stream everywhere.
// Uniforms and exponentials are made here rather than by <random>'s
// distributions, whose algorithms the standard leaves to each library.
class Stream {
  public:
    Stream(std::uint64_t seed, std::uint64_t index) {
        std::seed_seq words{
            static_cast<std::uint32_t>(seed), static_cast<std::uint32_t>(seed >> 32),
            static_cast<std::uint32_t>(index), static_cast<std::uint32_t>(index >> 32)};
        engine_.seed(words);
    }
    // Uniform on [0, 1) with 53 random bits.
    double uniform() noexcept { return static_cast<double>(engine_() >> 11) * 0x1.0p-53; }
    // Exp(1) by inversion. u is a multiple of 2^-53, so 1 - u is exact and lies
    // in (0, 1]: the logarithm is finite, and log is cheaper than log1p.
    double exponential() noexcept { return -std::log(1.0 - uniform()); }

  private:
    std::mt19937_64 engine_;
};

void check_settings(const io::Chain& chain, const SimulationSettings& s) {
    const auto& len = s.length;
    if (len.time.has_value() == len.steps.has_value())
        throw std::invalid_argument("simulation: give either a time or a number of steps");
    if (len.time && !(*len.time > 0 && std::isfinite(*len.time)))
        throw std::invalid_argument("simulation: the run time must be positive and finite");
    if (len.steps && *len.steps == 0)
        throw std::invalid_argument("simulation: the number of steps must be positive");
    if (!(len.warmup >= 0 && std::isfinite(len.warmup)))
        throw std::invalid_argument("simulation: the warm-up must be >= 0");
    if (!(s.confidence > 0 && s.confidence < 1))
        throw std::invalid_argument("simulation: the confidence must lie in (0, 1)");
    if (s.start_state >= chain.states)
        throw std::invalid_argument("simulation: the start state " + std::to_string(s.start_state) +
                                    " is not a state of the chain (it has " +
                                    std::to_string(chain.states) + ")");
}

// Enough small batches that about sqrt(n) of them remain after merging for
// runs up to ~4e9 transitions, within ~32 MB of accumulators.
std::size_t batch_store(std::size_t quantities) {
    constexpr std::size_t most = std::size_t{1} << 16, budget = std::size_t{1} << 22;
    const std::size_t fit =
        std::bit_floor(std::max<std::size_t>(budget / std::max<std::size_t>(quantities, 1), 64));
    return std::min(most, fit);
}

// One replication's run after warm-up, on its own clock (0 at the end of warm-up).
template <bool Ctmc, bool Labelled>
class Run {
  public:
    Run(const PreparedChain& p, Stream& stream, std::size_t quantities, double initial_batch,
        std::size_t store)
        : p_(p), stream_(stream), q_(quantities), batches_(quantities, initial_batch, store) {}

    // Time-weighted values of `state` held for `dt`, split at batch ends.
    void hold(std::uint64_t state, double dt) {
        const double* v = p_.table.data() + state * p_.weighted;
        while (clock_ + dt > batches_.batch_end()) {
            const double part = batches_.batch_end() - clock_;
            add(v, part);
            clock_ = batches_.batch_end();
            dt -= part;
            batches_.close_batch();
        }
        add(v, dt);
        clock_ += dt;
    }

    // The path stays in an absorbing state for `dt`; a labelled self-loop there
    // still fires, at its rate (ctmc) or probability per step (dtmc), and is
    // counted by its expected number of firings.
    void hold_absorbed(std::uint64_t state, double dt) {
        std::vector<double> rates(q_, 0.0);
        for (std::size_t q = 0; q < p_.weighted; ++q)
            rates[q] = p_.table[state * p_.weighted + q];
        if (Labelled)
            for (auto k = p_.chain.offsets[state]; k < p_.chain.offsets[state + 1]; ++k)
                if (p_.chain.targets[k] == state && p_.label_slot[p_.chain.events[k]] >= 0)
                    rates[p_.label_slot[p_.chain.events[k]]] += p_.chain.weights[k];
        while (clock_ + dt > batches_.batch_end()) {
            const double part = batches_.batch_end() - clock_;
            for (std::size_t q = 0; q < q_; ++q)
                batches_.open()[q] += rates[q] * part;
            clock_ = batches_.batch_end();
            dt -= part;
            batches_.close_batch();
        }
        for (std::size_t q = 0; q < q_; ++q)
            batches_.open()[q] += rates[q] * dt;
        clock_ += dt;
    }

    // Takes one transition out of `state` (already held); returns the next state.
    std::uint64_t jump(std::uint64_t state) {
        const auto move = p_.sampler.pick(state, stream_.uniform());
        if constexpr (Labelled) {
            const auto slot = p_.label_slot[move.label];
            if (slot >= 0)
                batches_.open()[slot] += 1; // fired at clock_: in the open batch (start, end]
        }
        return move.target;
    }

    double holding(std::uint64_t state) {
        return Ctmc ? stream_.exponential() * p_.sampler.mean_holding(state) : 1.0;
    }

    double clock() const noexcept { return clock_; }
    BatchMeans& batches() noexcept { return batches_; }

  private:
    void add(const double* v, double dt) noexcept {
        double* open = batches_.open();
        for (std::size_t q = 0; q < p_.weighted; ++q)
            open[q] += v[q] * dt;
    }

    const PreparedChain& p_;
    Stream& stream_;
    std::size_t q_;
    BatchMeans batches_;
    double clock_ = 0;
};

template <bool Ctmc, bool Labelled>
void simulate(const PreparedChain& p, const SimulationSettings& s, Stream& stream,
              ReplicationResult& out) {
    const Sampler& sampler = p.sampler;
    const std::size_t quantities = p.names.size();
    const bool by_time = Ctmc && s.length.time.has_value();
    // A dtmc's "time" counts steps.
    const std::uint64_t steps =
        by_time ? 0
                : (s.length.steps ? *s.length.steps
                                  : static_cast<std::uint64_t>(std::llround(*s.length.time)));
    if (!by_time && steps == 0)
        throw std::invalid_argument("simulation: the run is shorter than one step");
    // A dtmc batch shorter than a step would only cut steps into pieces.
    std::size_t store = batch_store(quantities);
    if (!Ctmc)
        store = std::min<std::size_t>(store, std::bit_floor(std::max<std::uint64_t>(steps, 4)));
    std::uint64_t state = s.start_state;
    std::optional<std::uint64_t> absorbed;

    // Warm-up. By time: the state at the warm-up's end is all that matters; the
    // holding time then running is Exp(total) afresh (no memory), so the run
    // restarts there with a new draw.
    double warm_time = 0;
    std::uint64_t warm_jumps = 0;
    if (by_time) {
        while (!sampler.absorbing(state)) {
            const double dt = stream.exponential() * sampler.mean_holding(state);
            if (warm_time + dt >= s.length.warmup)
                break;
            warm_time += dt;
            state = sampler.pick(state, stream.uniform()).target;
            ++warm_jumps;
        }
    } else {
        const auto warm_steps = static_cast<std::uint64_t>(std::llround(s.length.warmup));
        for (std::uint64_t i = 0; i < warm_steps && !sampler.absorbing(state); ++i) {
            if (Ctmc)
                warm_time += stream.exponential() * sampler.mean_holding(state);
            state = sampler.pick(state, stream.uniform()).target;
            ++warm_jumps;
        }
    }

    // Batches sized to fill the run (by time, or dtmc steps) with the whole
    // store, a hair longer so that the last one is the open one; a ctmc run by
    // steps has an unknown length: start at the shortest plausible batch and let
    // the store double it.
    double initial_batch;
    if (by_time)
        initial_batch = *s.length.time / double(store) * (1 + 1e-9);
    else if (!Ctmc)
        initial_batch = double(steps) / double(store) * (1 + 1e-9);
    else {
        double fastest = 0;
        for (std::uint64_t i = 0; i < sampler.states(); ++i)
            fastest = std::max(fastest, sampler.total_rate(i));
        initial_batch = fastest > 0 ? double(steps) / fastest / double(store) : 1.0;
    }
    Run<Ctmc, Labelled> run(p, stream, quantities, initial_batch, store);

    std::uint64_t n = 0;
    if (by_time) {
        const double end = *s.length.time;
        for (;;) {
            if (sampler.absorbing(state)) {
                absorbed = state;
                run.hold_absorbed(state, end - run.clock());
                break;
            }
            const double dt = run.holding(state);
            if (run.clock() + dt >= end) {
                run.hold(state, end - run.clock());
                break;
            }
            run.hold(state, dt);
            state = run.jump(state);
            ++n;
        }
        out.simulated = end;
    } else {
        for (std::uint64_t i = 0; i < steps; ++i) {
            if (sampler.absorbing(state)) {
                absorbed = state;
                const double left = double(steps - i);
                double per_step = 1;
                if (Ctmc) {
                    // Held for what the remaining steps would have taken at the
                    // run's mean holding time so far (1 each before any jump).
                    const double jumps = double(warm_jumps + n);
                    per_step = jumps > 0 ? (warm_time + run.clock()) / jumps : 1.0;
                }
                run.hold_absorbed(state, left * per_step);
                if (!Ctmc)
                    n += steps - i; // each held step is a step of the dtmc
                break;
            }
            run.hold(state, run.holding(state));
            state = run.jump(state);
            ++n;
        }
        out.simulated = run.clock();
    }
    out.transitions = n;
    out.final_state = state;
    out.absorbed_in = absorbed;
    const auto intervals = run.batches().finish(out.simulated, n, s.confidence);
    out.estimates.resize(quantities);
    for (std::size_t q = 0; q < quantities; ++q) {
        Estimate& e = out.estimates[q];
        e.name = p.names[q];
        e.kind = p.kinds[q];
        e.mean = intervals[q].mean;
        e.half_width = intervals[q].half_width;
        e.standard_error = intervals[q].standard_error;
        e.batches = intervals[q].batches;
        e.batch_size = intervals[q].batch_size;
    }
}

} // namespace

std::shared_ptr<const PreparedChain> prepare(const io::Chain& chain) {
    auto p = std::make_shared<PreparedChain>(chain);
    const std::uint64_t states = chain.states;
    std::vector<const std::vector<double>*> columns;
    auto add_column = [&](const std::string& name, const char* kind,
                          const std::vector<double>& values) {
        if (values.size() != states)
            throw std::invalid_argument("simulation: " + std::string(kind) + " '" + name +
                                        "' has " + std::to_string(values.size()) + " values for " +
                                        std::to_string(states) + " states");
        p->names.push_back(name);
        p->kinds.push_back(kind);
        columns.push_back(&values);
    };
    for (const auto& v : chain.variables)
        add_column(v.name, "variable", v.values);
    for (const auto& m : chain.measures)
        add_column(m.name, "measure", m.values);
    // As the summary's event rates: intensities first (they also count firings
    // that change nothing), then labels for the names they do not cover; merged
    // transitions ("several") only when there are no intensities.
    for (const auto& e : chain.event_intensities)
        add_column(e.name, "event", e.values);
    p->weighted = columns.size();
    p->table.resize(states * p->weighted);
    for (std::size_t q = 0; q < p->weighted; ++q)
        for (std::uint64_t i = 0; i < states; ++i)
            p->table[i * p->weighted + q] = (*columns[q])[i];

    if (!chain.event_names.empty() && !chain.events.empty()) {
        if (chain.events.size() != chain.targets.size())
            throw std::invalid_argument(
                "simulation: the chain has " + std::to_string(chain.events.size()) +
                " transition labels for " + std::to_string(chain.targets.size()) + " transitions");
        p->label_slot.assign(std::size_t{Sampler::no_label} + 1, -1);
        for (std::size_t l = 0; l < chain.event_names.size(); ++l) {
            const auto& name = chain.event_names[l];
            const bool covered =
                std::any_of(chain.event_intensities.begin(), chain.event_intensities.end(),
                            [&](const io::Measure& m) { return m.name == name; });
            const bool merged =
                !chain.event_intensities.empty() && name == model::several_events_label;
            if (covered || merged)
                continue;
            p->label_slot[l] = static_cast<std::int64_t>(p->names.size());
            p->names.push_back(name);
            p->kinds.push_back("event");
        }
        p->labelled = p->names.size() > p->weighted;
    }
    return p;
}

ReplicationResult run_replication(const PreparedChain& prepared, const SimulationSettings& settings,
                                  std::uint64_t index) {
    check_settings(prepared.chain, settings);
    const auto started = std::chrono::steady_clock::now();
    ReplicationResult out;
    out.index = index;
    Stream stream(settings.seed, index);
    const bool ctmc = prepared.chain.kind == io::ChainKind::ctmc;
    if (ctmc && prepared.labelled)
        simulate<true, true>(prepared, settings, stream, out);
    else if (ctmc)
        simulate<true, false>(prepared, settings, stream, out);
    else if (prepared.labelled)
        simulate<false, true>(prepared, settings, stream, out);
    else
        simulate<false, false>(prepared, settings, stream, out);
    out.wall_seconds =
        std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();
    return out;
}

ReplicationResult run_replication(const io::Chain& chain, const SimulationSettings& settings,
                                  std::uint64_t index) {
    check_settings(chain, settings);
    return run_replication(*prepare(chain), settings, index);
}

} // namespace longrun::simulate
