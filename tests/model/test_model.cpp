// Model descriptions: generated chains against closed forms from the
// literature, the exploration's own promises, and every error it reports.
#include "generated_chain.hpp"

#include "model/explore.hpp"
#include "model/model_file.hpp"
#include "support/test_chains.hpp"

#include "io/error.hpp"

#include <gtest/gtest.h>

#include <cmath>
#include <fstream>
#include <map>
#include <string>

namespace {

using namespace longrun;
using model_testing::stationary;
using model_testing::variable;

io::Chain generate(const std::string& yaml, const model::Overrides& sets = {},
                   model::ExploreOptions options = {}, model::ExploreReport* report = nullptr) {
    return model::explore(model::parse_model(yaml, "model.yaml", sets), options, report);
}

// Probability of each value of one variable.
std::map<long, double> marginal(const io::Chain& c, const std::vector<double>& pi,
                                const std::string& name) {
    std::map<long, double> m;
    const auto& v = variable(c, name);
    for (std::size_t s = 0; s < pi.size(); ++s)
        m[static_cast<long>(v.values[s])] += pi[s];
    return m;
}

// Runs `body`, expects an error of type E whose message contains every piece.
template <class E = InputError, class Body>
void expect_error(Body&& body, std::initializer_list<std::string> pieces) {
    try {
        body();
        ADD_FAILURE() << "no error; expected one containing '" << *pieces.begin() << "'";
    } catch (const E& e) {
        const std::string what = e.what();
        EXPECT_EQ(what.find('\n'), std::string::npos) << "more than one line: " << what;
        for (const auto& p : pieces)
            EXPECT_NE(what.find(p), std::string::npos) << "'" << p << "' missing from: " << what;
    }
}

void expect_model_error(const std::string& yaml, std::initializer_list<std::string> pieces) {
    expect_error([&] { generate(yaml); }, pieces);
}

// M/M/c/K written as a model: one variable, arrivals blocked at K.
std::string mmck_model(int c, int K, double lambda, double mu) {
    return "kind: ctmc\n"
           "parameters: {lambda: " +
           std::to_string(lambda) + ", mu: " + std::to_string(mu) + ", c: " + std::to_string(c) +
           ", K: " + std::to_string(K) +
           "}\n"
           "variables:\n"
           "  n: {from: 0, to: K}\n"
           "start: {n: 0}\n"
           "events:\n"
           "  - {name: arrive, when: \"n < K\", rate: lambda, then: {n: \"n + 1\"}}\n"
           "  - {name: leave, when: \"n > 0\", rate: \"min(n, c) * mu\", then: {n: \"n - 1\"}}\n"
           "measures:\n"
           "  full: \"n == K\"\n";
}

TEST(ModelCheckValues, MMcKMatchesClosedForm) {
    // p_n from Gross & Harris, Fundamentals of Queueing Theory (the M/M/c/K
    // model), coded independently in tests/support/test_chains.hpp.
    const int c = 3, K = 12;
    const double lambda = 2.5, mu = 1.1;
    const io::Chain chain = generate(mmck_model(c, K, lambda, mu));
    ASSERT_EQ(chain.states, static_cast<std::uint64_t>(K + 1));
    const auto pi = stationary(chain);
    const auto m = marginal(chain, pi, "n");
    const auto expected = testing_support::mmck_closed_form(c, K, lambda, mu);
    for (int n = 0; n <= K; ++n)
        EXPECT_NEAR(m.at(n), expected[n], 1e-13) << "n = " << n;
}

TEST(ModelCheckValues, SetOverridesAParameter) {
    const io::Chain chain = generate(mmck_model(3, 12, 2.5, 1.1), {{"lambda", "4"}, {"K", "7"}});
    ASSERT_EQ(chain.states, 8u);
    const auto m = marginal(chain, stationary(chain), "n");
    const auto expected = testing_support::mmck_closed_form(3, 7, 4.0, 1.1);
    for (int n = 0; n <= 7; ++n)
        EXPECT_NEAR(m.at(n), expected[n], 1e-13);
}

TEST(ModelCheckValues, ErlangLossMatchesFormulaAndTable) {
    // M/M/10/10 at 4.46 erlangs: blocking = P(n = 10) = Erlang B.
    const io::Chain chain = generate(mmck_model(10, 10, 4.46, 1.0));
    const auto pi = stationary(chain);
    double blocking = 0;
    const auto& full = chain.measures.at(0);
    ASSERT_EQ(full.name, "full");
    for (std::size_t s = 0; s < pi.size(); ++s)
        blocking += full.values[s] * pi[s];
    // Erlang B by its standard recursion (test_chains.hpp).
    EXPECT_NEAR(blocking, testing_support::erlang_b(10, 4.46), 1e-14);
    // Standard Erlang B tables, row N = 10, column 1 % blocking: A = 4.46 erlangs
    // (recalled from memory; the table rounds the load to two decimals).
    EXPECT_NEAR(blocking, 0.01, 5e-4);
}

TEST(ModelCheckValues, TriangleHasBinomialStateCount) {
    // States n1 + n2 <= K: (K + 1)(K + 2) / 2 of them (count of pairs of
    // non-negative integers with bounded sum). K = 400 makes the hash table grow.
    const std::string yaml = "kind: ctmc\n"
                             "parameters: {K: 400}\n"
                             "variables: {n1: {from: 0, to: K}, n2: {from: 0, to: K}}\n"
                             "start: {n1: 0, n2: 0}\n"
                             "events:\n"
                             "  - {name: a1, when: \"n1 + n2 < K\", rate: 1, then: {n1: n1 + 1}}\n"
                             "  - {name: a2, when: \"n1 + n2 < K\", rate: 2, then: {n2: n2 + 1}}\n"
                             "  - {name: d1, when: n1 > 0, rate: 3, then: {n1: n1 - 1}}\n"
                             "  - {name: d2, when: n2 > 0, rate: 4, then: {n2: n2 - 1}}\n";
    for (auto lookup : {model::Lookup::direct, model::Lookup::hash}) {
        model::ExploreOptions o;
        o.lookup = lookup;
        model::ExploreReport r;
        const io::Chain chain = generate(yaml, {}, o, &r);
        EXPECT_EQ(chain.states, 401u * 402u / 2u);
        EXPECT_EQ(r.direct_lookup, lookup == model::Lookup::direct);
        // Interior states have 4 transitions; count them exactly: every state has
        // d1 if n1>0, d2 if n2>0, a1 and a2 if n1+n2<K.
        std::uint64_t expected = 0;
        for (int a = 0; a <= 400; ++a)
            for (int b = 0; a + b <= 400; ++b)
                expected += (a > 0) + (b > 0) + 2 * (a + b < 400);
        EXPECT_EQ(chain.transitions, expected);
    }
}

TEST(ModelExploration, StartIsStateZeroAndOrderIsBreadthFirst) {
    const std::string yaml = "kind: ctmc\n"
                             "variables: {x: {from: -3, to: 3}}\n"
                             "start: {x: 1}\n"
                             "events:\n"
                             "  - {name: up, when: x < 3, rate: 1, then: {x: x + 1}}\n"
                             "  - {name: down, when: x > -3, rate: 1, then: {x: x - 1}}\n";
    const io::Chain chain = generate(yaml);
    const auto& x = variable(chain, "x").values;
    // Breadth first from 1, events in file order: 1, 2, 0, 3, -1, -2, -3.
    const std::vector<double> expected{1, 2, 0, 3, -1, -2, -3};
    EXPECT_EQ(x, expected);
    EXPECT_EQ(*variable(chain, "x").lower, -3);
    EXPECT_EQ(*variable(chain, "x").upper, 3);
    for (std::uint64_t s = 0; s < chain.states; ++s)
        for (auto k = chain.offsets[s] + 1; k < chain.offsets[s + 1]; ++k)
            EXPECT_LT(chain.targets[k - 1], chain.targets[k]);
}

TEST(ModelExploration, ParallelTransitionsAreMerged) {
    // Two events lead from 0 to 1: one transition of rate 3 labelled "several";
    // a third leads from 1 to 0 alone and keeps its own label.
    const std::string yaml = "kind: ctmc\n"
                             "variables: {x: {from: 0, to: 1}}\n"
                             "start: {x: 0}\n"
                             "events:\n"
                             "  - {name: push, when: x == 0, rate: 1, then: {x: 1}}\n"
                             "  - {name: shove, when: x == 0, rate: 2, then: {x: 1}}\n"
                             "  - {name: back, when: x == 1, rate: 5, then: {x: 0}}\n"
                             "  - {name: idle, rate: 7}\n";
    model::ExploreReport r;
    const io::Chain chain = generate(yaml, {}, {}, &r);
    ASSERT_EQ(chain.states, 2u);
    ASSERT_EQ(chain.transitions, 2u);
    EXPECT_EQ(r.merged, 1u);
    EXPECT_EQ(r.dropped_self_loops, 2u); // `idle` changes nothing in either state
    EXPECT_DOUBLE_EQ(chain.weights[0], 3.0);
    EXPECT_DOUBLE_EQ(chain.weights[1], 5.0);
    const std::vector<std::string> names{"push", "shove", "back", "idle", "several"};
    EXPECT_EQ(chain.event_names, names);
    EXPECT_EQ(chain.events[0], 4);
    EXPECT_EQ(chain.events[1], 2);
}

TEST(ModelExploration, DtmcLeftoverStaysAsSelfLoop) {
    // A lazy walk on 0..4 that moves right w.p. 0.3 and left w.p. 0.2, staying
    // otherwise; reflecting ends. Detailed balance gives pi_{k+1}/pi_k = 0.3/0.2.
    const std::string yaml = "kind: dtmc\n"
                             "leftover_probability: stay\n"
                             "variables: {k: {from: 0, to: 4}}\n"
                             "start: {k: 0}\n"
                             "events:\n"
                             "  - {name: right, when: k < 4, rate: 0.3, then: {k: k + 1}}\n"
                             "  - {name: left, when: k > 0, rate: 0.2, then: {k: k - 1}}\n";
    const io::Chain chain = generate(yaml);
    ASSERT_EQ(chain.states, 5u);
    for (std::uint64_t s = 0; s < chain.states; ++s) {
        double sum = 0;
        for (auto k = chain.offsets[s]; k < chain.offsets[s + 1]; ++k)
            sum += chain.weights[k];
        EXPECT_NEAR(sum, 1.0, 1e-15);
    }
    EXPECT_EQ(chain.event_names.back(), "stay");
    const auto m = marginal(chain, stationary(chain), "k");
    for (int k = 0; k < 4; ++k)
        EXPECT_NEAR(m.at(k + 1) / m.at(k), 1.5, 1e-12);
}

TEST(ModelExploration, DerivedParametersAndMeasures) {
    const std::string yaml = "kind: ctmc\n"
                             "parameters: {a: 2, b: \"a * 3\"}\n"
                             "variables: {x: {from: 0, to: b}}\n"
                             "start: {x: 0}\n"
                             "events:\n"
                             "  - {name: up, when: x < b, rate: 1, then: {x: x + 1}}\n"
                             "  - {name: down, when: x > 0, rate: 1, then: {x: x - 1}}\n"
                             "measures: {odd: \"x % 2\", not_empty: \"!(x == 0)\"}\n";
    const io::Chain chain = generate(yaml, {{"a", "3"}});
    EXPECT_EQ(chain.states, 10u);
    ASSERT_EQ(chain.measures.size(), 2u);
    const auto& x = variable(chain, "x").values;
    for (std::uint64_t s = 0; s < chain.states; ++s) {
        EXPECT_EQ(chain.measures[0].values[s], std::fmod(x[s], 2));
        EXPECT_EQ(chain.measures[1].values[s], x[s] != 0 ? 1 : 0);
    }
}

// ---- errors: one line, the file and line or the state ---------------------------

const std::string good_head = "kind: ctmc\n"                       // 1
                              "parameters: {r: 1}\n"               // 2
                              "variables: {x: {from: 0, to: 3}}\n" // 3
                              "start: {x: 0}\n"                    // 4
                              "events:\n";                         // 5

TEST(ModelErrors, YamlSyntax) {
    expect_model_error("kind: ctmc\nvariables: {x: {from: 0, to: 3}\nstart: {x: 0}\n",
                       {"model.yaml:", "not valid YAML"});
    expect_model_error("kind: ctmc\nevents:\n  - name: a\n   rate: 1\n",
                       {"model.yaml:4:", "not valid YAML"});
}

TEST(ModelErrors, StructureOfTheFile) {
    expect_model_error("kind: markov\n", {"model.yaml:1:", "'kind' is ctmc"});
    expect_model_error(good_head + "  - {name: a, rate: 1, then: {y: 1}}\n",
                       {"model.yaml:6:", "'y' is not a variable"});
    expect_model_error(good_head + "  - {name: a, rates: 1}\n",
                       {"model.yaml:6:", "unknown key 'rates'"});
    expect_model_error(good_head + "  - {name: several, rate: 1}\n", {"model.yaml:6:", "reserved"});
    expect_model_error("kind: ctmc\nvariables: {x: {from: 0, to: 3}}\nstart: {}\nevents:\n"
                       "  - {name: a, rate: 1}\n",
                       {"model.yaml:3:", "no value for variable 'x'"});
    expect_model_error("kind: ctmc\nvariables: {x: {from: 0, to: 3}}\nstart: {x: 7}\nevents:\n"
                       "  - {name: a, rate: 1}\n",
                       {"model.yaml:3:", "outside its bounds 0..3"});
    expect_model_error("kind: ctmc\nkind: dtmc\n", {"model.yaml:2:", "appears twice"});
}

TEST(ModelErrors, UnknownNameInExpression) {
    expect_model_error(good_head + "  - name: a\n"      // 6
                                   "    when: x < 3\n"  // 7
                                   "    rate: rr * 2\n" // 8
                                   "    then: {x: x + 1}\n",
                       {"model.yaml:8:", "event 'a'", "unknown name 'rr'", "rr * 2"});
    expect_model_error(good_head + "  - {name: a, rate: 1, when: \"y > 0\", then: {x: 1}}\n",
                       {"model.yaml:6:", "unknown name 'y'"});
    expect_model_error("kind: ctmc\nparameters: {K: 3}\nvariables: {x: {from: 0, to: KK}}\n",
                       {"model.yaml:3:", "upper bound", "unknown name 'KK'"});
}

TEST(ModelErrors, ExpressionSyntax) {
    expect_model_error(good_head + "  - {name: a, rate: \"r +* 2\", then: {x: 1}}\n",
                       {"model.yaml:6:", "event 'a'", "r +* 2"});
    expect_model_error(good_head + "  - {name: a, rate: \"min(r\", then: {x: 1}}\n",
                       {"model.yaml:6:", "min(r"});
}

TEST(ModelErrors, UpdateLeavesBounds) {
    expect_model_error(good_head + "  - name: up\n"    // 6
                                   "    rate: r\n"     // 7
                                   "    then:\n"       // 8
                                   "      x: x + 1\n", // 9
                       {"model.yaml:9:", "event 'up'", "gives 4", "bounds 0..3", "(x=3)"});
    expect_model_error(good_head + "  - {name: half, rate: r, then: {x: x + 0.5}}\n",
                       {"model.yaml:6:", "not an integer", "state 0 (x=0)"});
}

TEST(ModelErrors, BadRates) {
    expect_model_error(good_head +
                           "  - {name: a, when: x < 3, rate: \"2 - x * x\", then: {x: x+1}}\n",
                       {"model.yaml:6:", "negative (-2)", "state 2 (x=2)"});
    expect_model_error(good_head + "  - {name: a, when: x < 3, rate: \"sqrt(x - 1)\", "
                                   "then: {x: x+1}}\n",
                       {"model.yaml:6:", "not a number", "(x=0)"});
    expect_model_error(good_head + "  - {name: a, when: x < 3, rate: \"1 / (x - 1)^2\", "
                                   "then: {x: x+1}}\n",
                       {"model.yaml:6:", "infinite", "(x=1)"});
}

TEST(ModelErrors, DtmcRowSum) {
    const std::string head = "kind: dtmc\n"
                             "variables: {x: {from: 0, to: 3}}\n"
                             "start: {x: 0}\n"
                             "events:\n";
    expect_model_error(head + "  - {name: up, when: x < 3, rate: 0.5, then: {x: x + 1}}\n"
                              "  - {name: down, when: x > 0, rate: 0.5, then: {x: x - 1}}\n",
                       {"model.yaml", "state 0 (x=0)", "sum to 0.5", "leftover_probability"});
    expect_model_error(head + "  - {name: up, when: x < 3, rate: 0.7, then: {x: x + 1}}\n"
                              "  - {name: down, rate: 0.7, then: {x: 0}}\n",
                       {"state 0 (x=0)", "sum to 1.4,"});
}

TEST(ModelErrors, CtmcAbsorbingStateIsAWarningNotAnError) {
    const std::string yaml = good_head + "  - {name: up, when: x < 3, rate: r, then: {x: x+1}}\n";
    model::ExploreReport r;
    const io::Chain chain = generate(yaml, {}, {}, &r);
    EXPECT_EQ(chain.states, 4u);
    EXPECT_EQ(r.unintended_absorbing, 1u);
    EXPECT_EQ(r.first_unintended_absorbing, "state 3 (x=3)");
    // Declared absorbing: no warning.
    generate(yaml + "absorbing: x == 3\n", {}, {}, &r);
    EXPECT_EQ(r.unintended_absorbing, 0u);
}

TEST(ModelErrors, TooManyStates) {
    model::ExploreOptions o;
    o.max_states = 100;
    expect_error([&] { generate(mmck_model(2, 1000, 1, 1), {}, o); },
                 {"model.yaml", "more than 100 reachable states", "--max-states 100"});
    model::ExploreOptions tight;
    tight.memory_budget = 2 << 20;
    tight.lookup = model::Lookup::hash;
    expect_error([&] { generate(mmck_model(2, 1000000, 1, 1), {}, tight); },
                 {"out of memory after", "states"});
}

TEST(ModelErrors, TooManyCombinationsToPack) {
    std::string yaml = "kind: ctmc\nvariables:\n";
    for (int i = 0; i < 5; ++i)
        yaml += "  v" + std::to_string(i) + ": {from: 0, to: 10000000000000}\n";
    yaml += "start: {v0: 0, v1: 0, v2: 0, v3: 0, v4: 0}\nevents:\n  - {name: a, rate: 1}\n";
    expect_model_error(yaml, {"model.yaml:", "2^64", "'v1'"});
}

TEST(ModelErrors, UnknownOverrideIsAUsageError) {
    expect_error<UsageError>(
        [&] {
            generate(mmck_model(2, 5, 1, 1), {{"lamda", "3"}});
        },
        {"--set lamda=3", "no parameter 'lamda'", "lambda"});
}

TEST(ModelErrors, MissingFile) {
    expect_error([] { model::read_model_file("/nonexistent/model.yaml"); },
                 {"/nonexistent/model.yaml", "cannot open"});
}

} // namespace
