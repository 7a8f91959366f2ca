// Small chains with known answers, built in memory for tests. Each builder
// documents the closed form its chain is checked against.
#pragma once

#include "io/chain.hpp"

#include <cmath>
#include <cstdint>
#include <utility>
#include <vector>

namespace longrun::testing_support {

// Birth-death ctmc on 0..K: birth `lambda` below K, death min(n, c) * mu.
// M/M/c/K when c < K; M/M/c/c (Erlang loss) when c == K.
inline io::Chain birth_death(int c, int K, double lambda, double mu) {
    std::vector<std::uint64_t> s, t;
    std::vector<double> w;
    for (int n = 0; n <= K; ++n) {
        if (n > 0) {
            s.push_back(n);
            t.push_back(n - 1);
            w.push_back(std::min(n, c) * mu);
        }
        if (n < K) {
            s.push_back(n);
            t.push_back(n + 1);
            w.push_back(lambda);
        }
    }
    io::Chain chain = io::chain_from_triples(io::ChainKind::ctmc, K + 1, s, t, w);
    io::StateVariable v{"n", true, {}, 0.0, double(K)};
    for (int n = 0; n <= K; ++n)
        v.values.push_back(n);
    chain.variables.push_back(v);
    return chain;
}

// M/M/c/K steady state: p_n = p_0 a^n / n! for n < c, p_0 a^n / (c! c^(n-c)) for
// n >= c, with a = lambda/mu (Gross & Harris, Fundamentals of Queueing Theory,
// the M/M/c/K model).
inline std::vector<double> mmck_closed_form(int c, int K, double lambda, double mu) {
    const double a = lambda / mu;
    std::vector<double> p(K + 1);
    double term = 1, total = 0;
    for (int n = 0; n <= K; ++n) {
        if (n > 0)
            term *= a / std::min(n, c);
        p[n] = term;
        total += term;
    }
    for (auto& x : p)
        x /= total;
    return p;
}

// Erlang B by the standard recursion B(0) = 1, B(k) = A B(k-1) / (k + A B(k-1)).
inline double erlang_b(int servers, double erlangs) {
    double b = 1;
    for (int k = 1; k <= servers; ++k)
        b = erlangs * b / (k + erlangs * b);
    return b;
}

// Two-station tandem line with finite buffers, state (x1, x2) -> x1 * n2 + x2.
inline io::Chain tandem(int n1, int n2, double lambda, double mu1, double mu2) {
    std::vector<std::uint64_t> s, t;
    std::vector<double> w;
    auto id = [&](int a, int b) { return static_cast<std::uint64_t>(a) * n2 + b; };
    for (int a = 0; a < n1; ++a)
        for (int b = 0; b < n2; ++b) {
            if (a + 1 < n1) {
                s.push_back(id(a, b));
                t.push_back(id(a + 1, b));
                w.push_back(lambda);
            }
            if (a > 0 && b + 1 < n2) {
                s.push_back(id(a, b));
                t.push_back(id(a - 1, b + 1));
                w.push_back(mu1);
            }
            if (b > 0) {
                s.push_back(id(a, b));
                t.push_back(id(a, b - 1));
                w.push_back(mu2);
            }
        }
    io::Chain chain = io::chain_from_triples(io::ChainKind::ctmc, std::uint64_t(n1) * n2, s, t, w);
    io::StateVariable q1{"q1", true, {}, 0.0, double(n1 - 1)};
    io::StateVariable q2{"q2", true, {}, 0.0, double(n2 - 1)};
    for (int a = 0; a < n1; ++a)
        for (int b = 0; b < n2; ++b) {
            q1.values.push_back(a);
            q2.values.push_back(b);
        }
    chain.variables = {q1, q2};
    return chain;
}

// Simple random walk on an undirected graph given by its edge list (no loops,
// no repeated edges): P_ij = 1 / deg(i).
inline io::Chain graph_walk(std::uint64_t nodes,
                            const std::vector<std::pair<std::uint64_t, std::uint64_t>>& edges) {
    std::vector<double> degree(nodes, 0);
    for (auto [a, b] : edges) {
        ++degree[a];
        ++degree[b];
    }
    std::vector<std::uint64_t> s, t;
    std::vector<double> w;
    for (auto [a, b] : edges) {
        s.push_back(a);
        t.push_back(b);
        w.push_back(1.0 / degree[a]);
        s.push_back(b);
        t.push_back(a);
        w.push_back(1.0 / degree[b]);
    }
    io::Chain chain = io::chain_from_triples(io::ChainKind::dtmc, nodes, s, t, w);
    io::StateVariable d{"degree", true, {}, {}, {}};
    d.values = degree;
    chain.variables.push_back(d);
    return chain;
}

// Edges of a ring of `nodes` with a chord of length `chord` from every `every`-th
// node. An even ring with odd chords is bipartite (its walk has period 2); an
// even chord, or an odd ring, closes an odd cycle (the walk is aperiodic).
inline std::vector<std::pair<std::uint64_t, std::uint64_t>>
ring_with_chords(std::uint64_t nodes, std::uint64_t every, std::uint64_t chord) {
    std::vector<std::pair<std::uint64_t, std::uint64_t>> edges;
    for (std::uint64_t v = 0; v < nodes; ++v)
        edges.emplace_back(v, (v + 1) % nodes);
    for (std::uint64_t v = 0; v < nodes; v += every)
        edges.emplace_back(v, (v + chord) % nodes);
    return edges;
}

// pi(v) = deg(v) / 2|E| for the simple random walk on an undirected graph
// (Levin, Peres & Wilmer, Markov Chains and Mixing Times, sec. 1.4).
inline std::vector<double>
degree_law(std::uint64_t nodes, const std::vector<std::pair<std::uint64_t, std::uint64_t>>& edges) {
    std::vector<double> pi(nodes, 0);
    for (auto [a, b] : edges) {
        pi[a] += 1.0 / (2.0 * double(edges.size()));
        pi[b] += 1.0 / (2.0 * double(edges.size()));
    }
    return pi;
}

// A dtmc from a dense row-stochastic matrix.
inline io::Chain dense_dtmc(const std::vector<std::vector<double>>& p) {
    std::vector<std::uint64_t> s, t;
    std::vector<double> w;
    for (std::size_t i = 0; i < p.size(); ++i)
        for (std::size_t j = 0; j < p[i].size(); ++j)
            if (p[i][j] != 0) {
                s.push_back(i);
                t.push_back(j);
                w.push_back(p[i][j]);
            }
    return io::chain_from_triples(io::ChainKind::dtmc, p.size(), s, t, w);
}

} // namespace longrun::testing_support
