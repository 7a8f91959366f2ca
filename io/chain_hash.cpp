#include "chain_hash.hpp"

#include <fmt/format.h>

#include <bit>
#include <cstdio>

namespace longrun::io {

namespace {

// splitmix64's finalizer: a bijection of 64-bit words with good avalanche.
constexpr std::uint64_t mix(std::uint64_t z) noexcept {
    z ^= z >> 30;
    z *= 0xbf58476d1ce4e5b9ULL;
    z ^= z >> 27;
    z *= 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
}

// One key per lane and per kind of term, so that a transition never hashes like
// a state value and the two lanes are independent functions of the data.
constexpr std::uint64_t lane_key[2] = {0x6a09e667f3bcc908ULL, 0xbb67ae8584caa73bULL};
constexpr std::uint64_t transition_key = 0x3c6ef372fe94f82bULL;
constexpr std::uint64_t value_key = 0xa54ff53a5f1d36f1ULL;

// Text hashed eight bytes at a time; the length goes first so that "ab"+"c"
// and "a"+"bc" differ.
struct TextHash {
    std::uint64_t state;
    explicit TextHash(std::uint64_t seed) : state(mix(seed)) {}
    void add(std::uint64_t word) { state = mix(state ^ word); }
    void add(const std::string& text) {
        add(static_cast<std::uint64_t>(text.size()));
        for (std::size_t i = 0; i < text.size(); i += 8) {
            std::uint64_t word = 0;
            for (std::size_t j = 0; j < 8 && i + j < text.size(); ++j)
                word |= static_cast<std::uint64_t>(static_cast<unsigned char>(text[i + j]))
                        << (8 * j);
            add(word);
        }
    }
    void add(double x) { add(std::bit_cast<std::uint64_t>(x)); }
    void add(const std::optional<double>& x) {
        add(static_cast<std::uint64_t>(x.has_value()));
        if (x)
            add(*x);
    }
};

// Everything every rank holds alike: sizes, kind and names, with their order.
std::uint64_t header_hash(const Chain& c, std::uint64_t seed) {
    TextHash h(seed);
    h.add(to_string(c.kind));
    h.add(c.states);
    h.add(c.transitions);
    // Labelled transitions take one more mixing step; the names (the same on every
    // rank, unlike the labels of a rank without transitions) tell the two apart.
    h.add(static_cast<std::uint64_t>(c.event_names.size()));
    for (const auto& name : c.event_names)
        h.add(name);
    h.add(static_cast<std::uint64_t>(c.variables.size()));
    for (const auto& v : c.variables) {
        h.add(v.name);
        h.add(static_cast<std::uint64_t>(v.integral));
        h.add(v.lower);
        h.add(v.upper);
    }
    h.add(static_cast<std::uint64_t>(c.measures.size()));
    for (const auto& m : c.measures)
        h.add(m.name);
    h.add(static_cast<std::uint64_t>(c.event_intensities.size()));
    for (const auto& e : c.event_intensities)
        h.add(e.name);
    return h.state;
}

// The per-state datasets: each gets a key from its kind, position and name.
void add_values(std::uint64_t (&lanes)[2], const std::vector<double>& values,
                std::uint64_t first_row, const std::string& what, std::size_t position) {
    for (int lane = 0; lane < 2; ++lane) {
        TextHash key(lane_key[lane] ^ value_key);
        key.add(static_cast<std::uint64_t>(position));
        key.add(what);
        std::uint64_t sum = 0;
        for (std::size_t i = 0; i < values.size(); ++i)
            sum += mix(mix(key.state ^ (first_row + i)) ^ std::bit_cast<std::uint64_t>(values[i]));
        lanes[lane] += sum;
    }
}

} // namespace

std::string chain_content_hash(const Chain& c, MPI_Comm comm) {
    std::uint64_t lanes[2] = {0, 0};
    const bool labelled = !c.events.empty();
    for (int lane = 0; lane < 2; ++lane) {
        const std::uint64_t key = mix(lane_key[lane] ^ transition_key);
        std::uint64_t sum = 0;
        for (std::uint64_t i = 0; i < c.local_rows(); ++i) {
            const std::uint64_t row = mix(key ^ (c.rows.begin + i));
            for (auto k = c.offsets[i]; k < c.offsets[i + 1]; ++k) {
                std::uint64_t x = mix(row ^ c.targets[k]);
                x = mix(x ^ std::bit_cast<std::uint64_t>(c.weights[k]));
                if (labelled)
                    x = mix(x ^ c.events[k]);
                sum += x;
            }
        }
        lanes[lane] = sum;
    }
    std::size_t position = 0;
    for (const auto& v : c.variables)
        add_values(lanes, v.values, c.rows.begin, "states/" + v.name, position++);
    for (const auto& m : c.measures)
        add_values(lanes, m.values, c.rows.begin, "measures/" + m.name, position++);
    for (const auto& e : c.event_intensities)
        add_values(lanes, e.values, c.rows.begin, "events/" + e.name, position++);
    // Unsigned sums wrap: MPI_SUM on MPI_UINT64_T is the same sum modulo 2^64.
    std::uint64_t total[2] = {0, 0};
    MPI_Allreduce(lanes, total, 2, MPI_UINT64_T, MPI_SUM, comm);
    std::uint64_t digest[2];
    for (int lane = 0; lane < 2; ++lane)
        digest[lane] = mix(total[lane] ^ header_hash(c, lane_key[lane]));
    return fmt::format("{:016x}{:016x}", digest[0], digest[1]);
}

ChainMatch match_chain(const std::string& recorded, const std::string& actual) {
    if (recorded.empty())
        return ChainMatch::not_recorded;
    return recorded == actual ? ChainMatch::same : ChainMatch::differs;
}

std::string chain_changed_message(const std::string& record_path, const std::string& recorded,
                                  const std::string& chain_path, const std::string& actual,
                                  const std::string& remedy) {
    return fmt::format("{}: made from a chain with content hash {}, but {} has content hash {}: "
                       "not the chain that was solved (changed since?); {}",
                       record_path, recorded, chain_path, actual, remedy);
}

void note_unrecorded_chain(MPI_Comm comm, const std::string& path, const std::string& why,
                           const std::string& matched_by) {
    int rank = 0;
    MPI_Comm_rank(comm, &rank);
    if (rank != 0)
        return;
    std::fprintf(stderr,
                 "longrun: note: %s records no content hash of its chain (%s): paired with the "
                 "chain by %s only\n",
                 path.c_str(), why.c_str(), matched_by.c_str());
    std::fflush(stderr);
}

} // namespace longrun::io
