// Small chains whose structure (classes, periods, absorbing states) and, where
// noted, reversibility are known from textbooks. Each builder names its source.
#pragma once

#include "io/chain.hpp"

#include <cstdint>
#include <vector>

namespace longrun::testing_support {

// Gambler's ruin dtmc on 0..N: from 0 < i < N up with probability p, down with
// 1 - p; 0 and N absorbing (self-loop of probability 1). Two absorbing states
// and N - 1 transient ones that communicate with each other (Grinstead & Snell,
// Introduction to Probability, ch. 11, absorbing Markov chains).
inline io::Chain gamblers_ruin(int N, double p) {
    std::vector<std::uint64_t> s, t;
    std::vector<double> w;
    auto add = [&](int a, int b, double x) {
        s.push_back(a);
        t.push_back(b);
        w.push_back(x);
    };
    add(0, 0, 1.0);
    for (int i = 1; i < N; ++i) {
        add(i, i - 1, 1 - p);
        add(i, i + 1, p);
    }
    add(N, N, 1.0);
    io::Chain chain = io::chain_from_triples(io::ChainKind::dtmc, N + 1, s, t, w);
    io::StateVariable v{"fortune", true, {}, 0.0, double(N)};
    for (int i = 0; i <= N; ++i)
        v.values.push_back(i);
    chain.variables.push_back(v);
    return chain;
}

// Ehrenfest urn with N balls, state = balls in the first urn: from k to k - 1 with
// probability k/N, to k + 1 with (N - k)/N. Irreducible with period 2; a birth-death
// chain, so reversible (Feller, An Introduction to Probability Theory and Its
// Applications I, ch. XV; Kac 1947).
inline io::Chain ehrenfest(int N) {
    std::vector<std::uint64_t> s, t;
    std::vector<double> w;
    for (int k = 0; k <= N; ++k) {
        if (k > 0) {
            s.push_back(k);
            t.push_back(k - 1);
            w.push_back(double(k) / N);
        }
        if (k < N) {
            s.push_back(k);
            t.push_back(k + 1);
            w.push_back(double(N - k) / N);
        }
    }
    io::Chain chain = io::chain_from_triples(io::ChainKind::dtmc, N + 1, s, t, w);
    io::StateVariable v{"first_urn", true, {}, 0.0, double(N)};
    for (int k = 0; k <= N; ++k)
        v.values.push_back(k);
    chain.variables.push_back(v);
    return chain;
}

// Simple random walk on the n-cycle (n >= 3): to each neighbour with probability
// 1/2. With `lazy_state` >= 0 that one state instead stays, goes left and goes right
// with 1/3 each. The plain walk has period 2 when n is even and is aperiodic when n
// is odd (Levin, Peres & Wilmer, Markov Chains and Mixing Times, sec. 1.3, periodic
// walk on the cycle; recalled from memory); one self-loop makes any irreducible
// chain aperiodic (same book, sec. 1.3).
inline io::Chain cycle_walk(std::uint64_t n, long long lazy_state = -1) {
    std::vector<std::uint64_t> s, t;
    std::vector<double> w;
    for (std::uint64_t v = 0; v < n; ++v) {
        const bool lazy = static_cast<long long>(v) == lazy_state;
        const double step = lazy ? 1.0 / 3 : 0.5;
        s.insert(s.end(), {v, v});
        t.insert(t.end(), {(v + 1) % n, (v + n - 1) % n});
        w.insert(w.end(), {step, step});
        if (lazy) {
            s.push_back(v);
            t.push_back(v);
            w.push_back(1.0 / 3);
        }
    }
    return io::chain_from_triples(io::ChainKind::dtmc, n, s, t, w);
}

// Deterministic dtmc that moves along each given cycle of states (each state in
// exactly one cycle): a closed class per cycle, whose period is its length.
inline io::Chain directed_cycles(std::uint64_t states,
                                 const std::vector<std::vector<std::uint64_t>>& cycles) {
    std::vector<std::uint64_t> s, t;
    std::vector<double> w;
    for (const auto& c : cycles)
        for (std::size_t k = 0; k < c.size(); ++k) {
            s.push_back(c[k]);
            t.push_back(c[(k + 1) % c.size()]);
            w.push_back(1.0);
        }
    return io::chain_from_triples(io::ChainKind::dtmc, states, s, t, w);
}

// ctmc 0 -> 1 -> ... -> n-1 with rate 1 each step; n-1 has no way out: n - 1
// transient states and one absorbing state.
inline io::Chain path_into_absorbing(std::uint64_t n) {
    std::vector<std::uint64_t> s, t;
    std::vector<double> w;
    for (std::uint64_t v = 0; v + 1 < n; ++v) {
        s.push_back(v);
        t.push_back(v + 1);
        w.push_back(1.0);
    }
    return io::chain_from_triples(io::ChainKind::ctmc, n, s, t, w);
}

// ctmc on a directed 3-cycle 0 -> 1 -> 2 -> 0 with rate `forward` and the reverse
// steps with rate `backward` (0 = absent).
inline io::Chain ctmc_triangle(double forward, double backward) {
    std::vector<std::uint64_t> s, t;
    std::vector<double> w;
    for (std::uint64_t v = 0; v < 3; ++v) {
        s.push_back(v);
        t.push_back((v + 1) % 3);
        w.push_back(forward);
        if (backward > 0) {
            s.push_back((v + 1) % 3);
            t.push_back(v);
            w.push_back(backward);
        }
    }
    return io::chain_from_triples(io::ChainKind::ctmc, 3, s, t, w);
}

} // namespace longrun::testing_support
