#include "explore.hpp"

#include "expression.hpp"
#include "io/error.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdlib>
#include <fstream>
#include <memory>
#include <optional>
#include <sstream>

namespace longrun::model {

namespace {

using Clock = std::chrono::steady_clock;

constexpr std::uint64_t bytes_per_transition = 8 + 8 + 2; // target, weight, event label
constexpr double dtmc_row_tolerance = 1e-9;

// Keys in fixed blocks: growing never copies, so the peak stays at 8 bytes a
// state instead of the 24 a doubling vector passes through.
class KeyStore {
  public:
    static constexpr unsigned shift = 20;
    static constexpr std::uint64_t block = std::uint64_t{1} << shift;

    std::uint64_t size() const noexcept { return size_; }
    std::uint64_t operator[](std::uint64_t i) const noexcept {
        return blocks_[i >> shift][i & (block - 1)];
    }
    void push_back(std::uint64_t key) {
        if ((size_ & (block - 1)) == 0)
            blocks_.push_back(std::make_unique_for_overwrite<std::uint64_t[]>(block));
        blocks_.back()[size_ & (block - 1)] = key;
        ++size_;
    }
    std::uint64_t bytes() const noexcept { return blocks_.size() * block * 8; }
    void clear() {
        blocks_.clear();
        blocks_.shrink_to_fit();
        size_ = 0;
    }

  private:
    std::vector<std::unique_ptr<std::uint64_t[]>> blocks_;
    std::uint64_t size_ = 0;
};

struct FreeDeleter {
    void operator()(void* p) const noexcept { std::free(p); }
};

// Index + 1 per combination of values (0: not seen). calloc hands large blocks
// out as fresh zero pages, so only the pages that states fall on cost memory.
class DirectIndex {
  public:
    explicit DirectIndex(std::uint64_t combinations)
        : slots_(static_cast<std::uint32_t*>(std::calloc(combinations, 4))),
          bytes_(combinations * 4) {
        if (!slots_)
            throw InputError(
                fmt::format("cannot reserve {} MiB for the state table", bytes_ >> 20));
    }
    // Returns the state's index; `fresh` becomes its index when it is new.
    std::uint64_t find_or_insert(std::uint64_t key, std::uint64_t fresh, bool& inserted) {
        auto& s = slots_.get()[key];
        inserted = s == 0;
        if (inserted)
            s = static_cast<std::uint32_t>(fresh + 1);
        return s - 1;
    }
    std::uint64_t bytes() const noexcept { return bytes_; }

  private:
    std::unique_ptr<std::uint32_t[], FreeDeleter> slots_;
    std::uint64_t bytes_;
};

inline std::uint64_t mix(std::uint64_t x) noexcept {
    x ^= x >> 30;
    x *= 0xbf58476d1ce4e5b9ULL;
    x ^= x >> 27;
    x *= 0x94d049bb133111ebULL;
    return x ^ (x >> 31);
}

// Linear probing over 8-byte slots: 40 bits of index + 1 and 24 bits of the
// hash, so that most mismatches are settled without touching the key store.
class HashIndex {
  public:
    using BudgetCheck = std::function<void(std::uint64_t extra_bytes)>;

    HashIndex(const KeyStore& keys, BudgetCheck check) : keys_(keys), check_(std::move(check)) {
        slots_.assign(std::uint64_t{1} << 16, 0);
        mask_ = slots_.size() - 1;
    }
    std::uint64_t find_or_insert(std::uint64_t key, std::uint64_t fresh, bool& inserted) {
        // Grow before probing: every key already in the table is then in the
        // key store, which the rehash reads (the new key is not there yet).
        if ((count_ + 1) * 4 > slots_.size() * 3)
            grow();
        const std::uint64_t h = mix(key);
        const std::uint64_t tag = h >> 40;
        for (std::uint64_t i = h & mask_;; i = (i + 1) & mask_) {
            const std::uint64_t s = slots_[i];
            if (s == 0) {
                slots_[i] = (tag << 40) | (fresh + 1);
                inserted = true;
                ++count_;
                return fresh;
            }
            if ((s >> 40) == tag && keys_[(s & index_mask) - 1] == key) {
                inserted = false;
                return (s & index_mask) - 1;
            }
        }
    }
    std::uint64_t bytes() const noexcept { return slots_.capacity() * 8; }

  private:
    static constexpr std::uint64_t index_mask = (std::uint64_t{1} << 40) - 1;
    const KeyStore& keys_;
    BudgetCheck check_;
    std::vector<std::uint64_t> slots_;
    std::uint64_t mask_ = 0, count_ = 0;

    void grow() {
        check_(slots_.size() * 2 * 8);
        std::vector<std::uint64_t> bigger(slots_.size() * 2, 0);
        const std::uint64_t mask = bigger.size() - 1;
        for (const std::uint64_t s : slots_) {
            if (s == 0)
                continue;
            std::uint64_t i = mix(keys_[(s & index_mask) - 1]) & mask;
            while (bigger[i] != 0)
                i = (i + 1) & mask;
            bigger[i] = s;
        }
        slots_.swap(bigger);
        mask_ = mask;
    }
};

struct CompiledEvent {
    std::optional<Expression> guard;
    Expression rate;
    std::vector<std::pair<std::size_t, Expression>> updates;
};

struct Entry {
    std::uint64_t target;
    double weight;
    std::uint16_t label;
};

// Shortest text that reads back as the same double: 0.3, not 0.29999999999999999.
std::string format_number(double v) {
    return fmt::format("{}", v);
}

class Explorer {
  public:
    Explorer(const Model& m, const ExploreOptions& o) : m_(m), o_(o) {
        const std::size_t nv = m.variables.size();
        slots_.assign(nv, 0.0);
        Scope scope;
        for (const auto& p : m.parameters)
            scope.constants.emplace_back(p.name, p.value);
        for (std::size_t i = 0; i < nv; ++i)
            scope.variables.emplace_back(m.variables[i].name, &slots_[i]);
        for (std::size_t i = 0; i < nv; ++i)
            slots_[i] = static_cast<double>(m.start[i]);

        unsigned __int128 product = 1;
        for (const auto& v : m.variables) {
            strides_.push_back(static_cast<std::uint64_t>(product));
            ranges_.push_back(static_cast<std::uint64_t>(v.upper - v.lower) + 1);
            lowers_.push_back(v.lower);
            product *= ranges_.back();
            if (product > ~std::uint64_t{0})
                throw InputError(fmt::format(
                    "{}the variables' ranges give more than 2^64 - 1 combinations of values (at "
                    "variable '{}'); narrow their bounds",
                    v.where.prefix(), v.name));
        }
        combinations_ = static_cast<std::uint64_t>(product);

        const bool dtmc = m.kind == io::ChainKind::dtmc;
        for (const auto& e : m.events) {
            const std::string who = fmt::format("event '{}'", e.name);
            CompiledEvent c{std::nullopt,
                            Expression(e.rate, scope, who + (dtmc ? ": probability" : ": rate")),
                            {}};
            if (e.guard)
                c.guard.emplace(*e.guard, scope, who + ": 'when'");
            for (const auto& u : e.updates)
                c.updates.emplace_back(u.variable,
                                       Expression(u.value, scope,
                                                  fmt::format("{}: new value of '{}'", who,
                                                              m.variables[u.variable].name)));
            events_.push_back(std::move(c));
        }
        for (const auto& meas : m.measures)
            measures_.emplace_back(meas.value, scope, fmt::format("measure '{}'", meas.name));
        if (m.absorbing)
            absorbing_.emplace(*m.absorbing, scope, "'absorbing'");

        stay_label_ = static_cast<std::uint16_t>(m.events.size());
        several_label_ = static_cast<std::uint16_t>(m.events.size() + 1);
        max_states_ = o.max_states ? o.max_states : default_max_states(m);
        max_states_ = std::min(max_states_, max_states_limit);
        budget_ = o.memory_budget ? o.memory_budget : available_memory_bytes() / 10 * 9;
        if (budget_ == 0)
            budget_ = ~std::uint64_t{0};
    }

    io::Chain run(ExploreReport* report) {
        start_time_ = Clock::now();
        last_progress_ = start_time_;
        const bool direct = o_.lookup == Lookup::direct || (o_.lookup == Lookup::automatic &&
                                                            combinations_ <= max_states_limit + 1 &&
                                                            combinations_ * 4 <= budget_ / 4);
        if (direct && combinations_ > max_states_limit + 1)
            throw InputError("the direct state table needs at most 2^32 - 1 combinations");
        io::Chain chain;
        chain.kind = m_.kind;
        if (direct)
            explore_with(chain, DirectIndex(combinations_));
        else
            explore_with(chain, HashIndex(keys_, [this](std::uint64_t extra) {
                             check_budget(extra, "the hash table of states");
                         }));
        finish(chain);
        if (report) {
            report_.direct_lookup = direct;
            report_.max_states = max_states_;
            report_.states = chain.states;
            report_.transitions = chain.transitions;
            report_.seconds = std::chrono::duration<double>(Clock::now() - start_time_).count();
            *report = report_;
        }
        return chain;
    }

  private:
    const Model& m_;
    const ExploreOptions& o_;
    std::vector<double> slots_;
    std::vector<std::uint64_t> strides_, ranges_;
    std::vector<std::int64_t> lowers_;
    std::uint64_t combinations_ = 1;
    std::vector<CompiledEvent> events_;
    std::vector<Expression> measures_;
    std::optional<Expression> absorbing_;
    std::uint16_t stay_label_ = 0, several_label_ = 0;
    bool stay_used_ = false, several_used_ = false;
    std::uint64_t max_states_ = 0, budget_ = 0, lookup_bytes_ = 0;
    KeyStore keys_;
    ExploreReport report_;
    Clock::time_point start_time_, last_progress_;

    std::uint64_t pack(const std::vector<std::int64_t>& values) const {
        std::uint64_t key = 0;
        for (std::size_t i = 0; i < values.size(); ++i)
            key += static_cast<std::uint64_t>(values[i] - lowers_[i]) * strides_[i];
        return key;
    }

    void unpack(std::uint64_t key, std::vector<std::int64_t>& values) {
        for (std::size_t i = 0; i < values.size(); ++i) {
            values[i] = lowers_[i] + static_cast<std::int64_t>((key / strides_[i]) % ranges_[i]);
            slots_[i] = static_cast<double>(values[i]);
        }
    }

    std::string describe(std::uint64_t index, const std::vector<std::int64_t>& values) const {
        std::string s = fmt::format("state {} (", index);
        for (std::size_t i = 0; i < values.size(); ++i)
            s += fmt::format("{}{}={}", i ? ", " : "", m_.variables[i].name, values[i]);
        return s + ")";
    }

    // Sizes, not capacities: reserve_up_front() asks for address space that
    // costs no memory until it is written.
    std::uint64_t held_bytes(const io::Chain& c) const {
        return keys_.bytes() + lookup_bytes_ + c.offsets.size() * 8 * (1 + events_.size()) +
               c.targets.size() * bytes_per_transition;
    }

    // A growing vector is copied, and while it moves it exists twice; worse, a
    // heap that does not hand freed memory back (as under some MPI libraries)
    // keeps every old copy. So ask once for as much address space as the
    // exploration can use: untouched pages cost nothing.
    void reserve_up_front(io::Chain& c) {
        const std::uint64_t states = std::min(max_states_, combinations_);
        const std::uint64_t per_state = std::max<std::uint64_t>(events_.size(), 1);
        const std::uint64_t by_budget = budget_ / bytes_per_transition;
        std::uint64_t transitions = states > by_budget / per_state ? by_budget : states * per_state;
        try {
            c.offsets.reserve(std::min<std::uint64_t>(states + 1, budget_ / 8));
            for (auto& e : c.event_intensities)
                e.values.reserve(std::min<std::uint64_t>(states, budget_ / 8));
            c.targets.reserve(transitions);
            c.weights.reserve(transitions);
            c.events.reserve(transitions);
        } catch (const std::bad_alloc&) {
            // Address space is limited (ulimit -v): grow step by step instead.
        }
    }

    void check_budget(std::uint64_t extra, const char* what) const {
        const std::uint64_t held = keys_.bytes() + lookup_bytes_ + arrays_bytes_;
        if (held + extra > budget_)
            throw InputError(fmt::format(
                "out of memory after {} states: {} needs {} MiB more, {} MiB held, budget {} "
                "MiB (90 % of the memory available at the start); narrow the variables' bounds "
                "or generate on a machine with more memory",
                keys_.size(), what, extra >> 20, held >> 20, budget_ >> 20));
    }
    std::uint64_t arrays_bytes_ = 0;

    void reserve_transitions(io::Chain& c, std::size_t more) {
        if (c.targets.size() + more <= c.targets.capacity())
            return;
        const std::size_t cap = std::max<std::size_t>(
            {c.targets.capacity() + c.targets.capacity() / 2, c.targets.size() + more, 1 << 16});
        // While one array moves, it exists twice.
        arrays_bytes_ = held_bytes(c) - keys_.bytes() - lookup_bytes_;
        check_budget(cap * 8 + (cap - c.targets.capacity()) * (8 + 2), "the transition arrays");
        c.targets.reserve(cap);
        c.weights.reserve(cap);
        c.events.reserve(cap);
        arrays_bytes_ = held_bytes(c) - keys_.bytes() - lookup_bytes_;
    }

    void reserve_offsets(io::Chain& c) {
        if (c.offsets.size() < c.offsets.capacity())
            return;
        const std::size_t cap = std::max<std::size_t>(c.offsets.capacity() * 3 / 2, 1 << 16);
        arrays_bytes_ = held_bytes(c) - keys_.bytes() - lookup_bytes_;
        check_budget(cap * 8 * (1 + events_.size()), "the row offsets and event intensities");
        c.offsets.reserve(cap);
        for (auto& e : c.event_intensities)
            e.values.reserve(cap);
        arrays_bytes_ = held_bytes(c) - keys_.bytes() - lookup_bytes_;
    }

    [[noreturn]] void too_many_states() const {
        throw InputError(fmt::format(
            "{}: more than {} reachable states (--max-states {}{}); raise --max-states, narrow "
            "the variables' bounds or check the guards",
            m_.file, max_states_, max_states_,
            o_.max_states ? "" : ", the default from the memory available"));
    }

    template <class Index>
    void explore_with(io::Chain& chain, Index&& index) {
        const std::size_t nv = m_.variables.size();
        const bool ctmc = m_.kind == io::ChainKind::ctmc;
        std::vector<std::int64_t> values(nv), next(nv);
        std::vector<double> new_values(nv);
        std::vector<Entry> row;
        row.reserve(events_.size() + 1);
        // Per state the rate (probability) of every event, self-loops included:
        // what the chain's transitions alone cannot tell (a lost arrival).
        chain.event_intensities.assign(events_.size(), {});
        for (std::size_t e = 0; e < events_.size(); ++e)
            chain.event_intensities[e].name = m_.events[e].name;
        reserve_up_front(chain);
        chain.offsets.clear();
        chain.offsets.push_back(0);

        std::uint64_t intensity_rows = 0;
        bool inserted = false;
        keys_.push_back(pack(m_.start));
        index.find_or_insert(keys_[0], 0, inserted);
        lookup_bytes_ = index.bytes();

        for (std::uint64_t s = 0; s < keys_.size(); ++s) {
            const std::uint64_t key = keys_[s];
            unpack(key, values);
            row.clear();
            double row_sum = 0;
            if (s == intensity_rows)
                intensity_rows = extend_intensities(chain, s);
            for (std::size_t e = 0; e < events_.size(); ++e) {
                const auto& ev = events_[e];
                if (ev.guard && (*ev.guard)() == 0)
                    continue;
                const double w = ev.rate();
                if (!(w >= 0) || std::isinf(w) || (!ctmc && w > 1))
                    bad_weight(ev.rate, w, s, values);
                if (w == 0)
                    continue;
                std::uint64_t target_key = key;
                for (const auto& [v, expr] : ev.updates) {
                    const double x = expr();
                    const auto& var = m_.variables[v];
                    if (!(x == std::floor(x)) || x < static_cast<double>(var.lower) ||
                        x > static_cast<double>(var.upper))
                        bad_update(expr, var, x, s, values);
                    target_key +=
                        static_cast<std::uint64_t>(static_cast<std::int64_t>(x) - values[v]) *
                        strides_[v];
                }
                row_sum += w;
                chain.event_intensities[e].values[s] = w;
                if (target_key == key && ctmc) {
                    ++report_.dropped_self_loops;
                    continue;
                }
                std::uint64_t fresh = keys_.size();
                const std::uint64_t t = index.find_or_insert(target_key, fresh, inserted);
                if (inserted) {
                    if (fresh >= max_states_)
                        too_many_states();
                    keys_.push_back(target_key);
                }
                row.push_back({t, w, static_cast<std::uint16_t>(e)});
            }
            if (!ctmc)
                close_dtmc_row(row, row_sum, s, values);
            else if (row.empty() && !(absorbing_ && (*absorbing_)() != 0)) {
                if (report_.unintended_absorbing++ == 0)
                    report_.first_unintended_absorbing = describe(s, values);
            }
            emit_row(chain, row);
            if ((s & 4095) == 4095) {
                lookup_bytes_ = index.bytes();
                arrays_bytes_ = held_bytes(chain) - keys_.bytes() - lookup_bytes_;
                check_budget(0, "what has been found so far");
                maybe_progress(s + 1);
            }
        }
        lookup_bytes_ = 0;
    }

    // Zeros a block of rows ahead, so that a firing costs one store and a state
    // no per-event work; finish() trims the block's unused end.
    std::uint64_t extend_intensities(io::Chain& c, std::uint64_t expanded) {
        constexpr std::uint64_t block = 4096;
        if (c.event_intensities.empty())
            return ~std::uint64_t{0};
        // Within the capacity reserved: growing past it would copy every array.
        const std::uint64_t reserved = c.event_intensities.front().values.capacity();
        const std::uint64_t rows = std::max(expanded + 1, std::min(expanded + block, reserved));
        for (auto& e : c.event_intensities)
            e.values.resize(rows, 0.0);
        return rows;
    }

    void maybe_progress(std::uint64_t expanded) {
        if (!o_.progress)
            return;
        const auto now = Clock::now();
        if (std::chrono::duration<double>(now - last_progress_).count() < o_.progress_interval)
            return;
        last_progress_ = now;
        o_.progress({keys_.size(), keys_.size() - expanded,
                     std::chrono::duration<double>(now - start_time_).count()});
    }

    void close_dtmc_row(std::vector<Entry>& row, double sum, std::uint64_t s,
                        const std::vector<std::int64_t>& values) {
        if (m_.leftover == Leftover::stay && sum < 1 - dtmc_row_tolerance) {
            row.push_back({s, 1 - sum, stay_label_});
            stay_used_ = true;
            return;
        }
        if (std::fabs(sum - 1) > dtmc_row_tolerance)
            throw InputError(fmt::format(
                "{}: {}: the probabilities of the enabled events sum to {}, not 1 (within {}){}",
                m_.file, describe(s, values), format_number(sum), dtmc_row_tolerance,
                m_.leftover == Leftover::stay || sum > 1
                    ? ""
                    : "; 'leftover_probability: stay' keeps what is missing as a self-loop"));
    }

    void emit_row(io::Chain& c, std::vector<Entry>& row) {
        // At most one transition per event: insertion sort beats std::sort here.
        for (std::size_t i = 1; i < row.size(); ++i)
            for (std::size_t j = i; j > 0 && row[j].target < row[j - 1].target; --j)
                std::swap(row[j], row[j - 1]);
        reserve_transitions(c, row.size());
        reserve_offsets(c);
        for (std::size_t i = 0; i < row.size(); ++i) {
            if (i > 0 && row[i].target == c.targets.back()) {
                c.weights.back() += row[i].weight;
                if (c.events.back() != row[i].label) {
                    c.events.back() = several_label_;
                    several_used_ = true;
                }
                ++report_.merged;
                continue;
            }
            c.targets.push_back(row[i].target);
            c.weights.push_back(row[i].weight);
            c.events.push_back(row[i].label);
        }
        c.offsets.push_back(c.targets.size());
    }

    [[noreturn]] void bad_weight(const Expression& e, double w, std::uint64_t s,
                                 const std::vector<std::int64_t>& values) const {
        const char* what = std::isnan(w)   ? "not a number"
                           : std::isinf(w) ? "infinite"
                           : w < 0         ? "negative"
                                           : "above 1";
        throw InputError(fmt::format("{}{}: \"{}\" is {} ({}) in {}", e.text().where.prefix(),
                                     e.role(), e.text().expression, what, format_number(w),
                                     describe(s, values)));
    }

    [[noreturn]] void bad_update(const Expression& e, const Variable& var, double x,
                                 std::uint64_t s, const std::vector<std::int64_t>& values) const {
        const std::string why =
            x == std::floor(x)
                ? fmt::format("outside its bounds {}..{} (add a 'when' that stops the event "
                              "there)",
                              var.lower, var.upper)
                : std::string("not an integer");
        throw InputError(fmt::format("{}{}: \"{}\" gives {}, {}, in {}", e.text().where.prefix(),
                                     e.role(), e.text().expression, format_number(x), why,
                                     describe(s, values)));
    }

    void finish(io::Chain& c) {
        const std::uint64_t n = keys_.size();
        c.states = n;
        c.transitions = c.targets.size();
        c.rows = {0, n};

        // Labels: the events, then "stay" and "several" only if some transition uses them.
        c.event_names.clear();
        for (const auto& e : m_.events)
            c.event_names.push_back(e.name);
        if (stay_used_)
            c.event_names.push_back("stay");
        if (several_used_) {
            const auto label = static_cast<std::uint16_t>(c.event_names.size());
            c.event_names.push_back(several_events_label);
            if (label != several_label_)
                for (auto& l : c.events)
                    if (l == several_label_)
                        l = label;
        }

        for (auto& e : c.event_intensities)
            e.values.resize(n);
        arrays_bytes_ = held_bytes(c) - keys_.bytes();
        check_budget(n * 8 * (m_.variables.size() + m_.measures.size() + 1),
                     "the state variables and measures");
        const std::size_t nv = m_.variables.size();
        c.variables.resize(nv);
        for (std::size_t i = 0; i < nv; ++i) {
            const auto& v = m_.variables[i];
            c.variables[i] = {
                v.name, true, {}, static_cast<double>(v.lower), static_cast<double>(v.upper)};
            c.variables[i].values.resize(n);
        }
        c.measures.resize(measures_.size());
        for (std::size_t j = 0; j < measures_.size(); ++j) {
            c.measures[j].name = m_.measures[j].name;
            c.measures[j].values.resize(n);
        }
        std::vector<std::int64_t> values(nv);
        for (std::uint64_t s = 0; s < n; ++s) {
            unpack(keys_[s], values);
            for (std::size_t i = 0; i < nv; ++i)
                c.variables[i].values[s] = slots_[i];
            for (std::size_t j = 0; j < measures_.size(); ++j) {
                const double x = measures_[j]();
                if (!std::isfinite(x))
                    throw InputError(fmt::format(
                        "{}{}: \"{}\" is {} in {}", measures_[j].text().where.prefix(),
                        measures_[j].role(), measures_[j].text().expression,
                        std::isnan(x) ? "not a number" : "infinite", describe(s, values)));
                c.measures[j].values[s] = x;
            }
        }
        keys_.clear();

        c.parameters.clear();
        for (const auto& p : m_.parameters)
            c.parameters.emplace_back(p.name, p.value);
        c.model_file = m_.file;
        c.model_text = m_.text;
    }
};

} // namespace

std::uint64_t available_memory_bytes() {
    std::ifstream in("/proc/meminfo");
    std::string line;
    while (std::getline(in, line)) {
        std::istringstream s(line);
        std::string key;
        std::uint64_t kib = 0;
        if (s >> key >> kib && key == "MemAvailable:")
            return kib * 1024;
    }
    return 0;
}

std::uint64_t bytes_per_state(const Model& m) {
    // keys 8, lookup up to 32 while a hash table grows, offsets 8, one double
    // per event (its intensity), and at the end one double per variable and
    // measure plus the writer's integer copy.
    return 8 + 32 + 8 + 8 * (m.variables.size() + m.measures.size() + m.events.size() + 1) +
           bytes_per_transition * (m.events.size() + 1);
}

std::uint64_t default_max_states(const Model& m) {
    const std::uint64_t available = available_memory_bytes();
    if (available == 0)
        return 100'000'000;
    return std::max<std::uint64_t>(1, available / 10 * 9 / bytes_per_state(m));
}

io::Chain explore(const Model& model, const ExploreOptions& options, ExploreReport* report) {
    return Explorer(model, options).run(report);
}

} // namespace longrun::model
