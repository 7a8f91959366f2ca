// What `generate` records beside the transitions: per event and state the rate
// (probability) with which it fires, lost firings included, and the model's
// parameters and text.
#include "generated_chain.hpp"

#include "model/explore.hpp"
#include "model/model_file.hpp"
#include "support/test_chains.hpp"

#include <gtest/gtest.h>
#include <unistd.h>

#include <filesystem>
#include <fstream>
#include <random>
#include <string>

namespace {

using namespace longrun;
using model_testing::stationary;

const io::Measure& intensity(const io::Chain& c, const std::string& event) {
    for (const auto& m : c.event_intensities)
        if (m.name == event)
            return m;
    throw std::runtime_error("no intensity for event " + event);
}

const std::vector<double>& queue_of(const io::Chain& c) {
    return model_testing::variable(c, "queue").values;
}

// M/M/1/K where an arrival at a full queue is lost: "arrive" is enabled in
// every state, and at K its update leaves the state as it is.
const std::string lossy_queue = "kind: ctmc\n"
                                "parameters: {arrival: 1.5, service: 2.0, room: 4}\n"
                                "variables:\n"
                                "  queue: {from: 0, to: room}\n"
                                "start: {queue: 0}\n"
                                "events:\n"
                                "  - name: arrive\n"
                                "    rate: arrival\n"
                                "    then: {queue: \"min(queue + 1, room)\"}\n"
                                "  - name: leave\n"
                                "    when: \"queue > 0\"\n"
                                "    rate: service\n"
                                "    then: {queue: \"queue - 1\"}\n";

TEST(EventIntensities, LostArrivalsCountInCtmc) {
    model::ExploreReport report;
    const io::Chain chain = model::explore(
        model::parse_model(lossy_queue, "queue.yaml", {{"arrival", "1.8"}}), {}, &report);
    ASSERT_EQ(chain.states, 5u);
    EXPECT_EQ(report.dropped_self_loops, 1u); // the lost arrival at queue = 4
    ASSERT_EQ(chain.event_intensities.size(), 2u);
    EXPECT_EQ(chain.event_intensities[0].name, "arrive");
    EXPECT_EQ(chain.event_intensities[1].name, "leave");
    const auto& queue = queue_of(chain);
    const auto& arrive = intensity(chain, "arrive").values;
    const auto& leave = intensity(chain, "leave").values;
    ASSERT_EQ(arrive.size(), chain.states);
    ASSERT_EQ(leave.size(), chain.states);
    for (std::uint64_t s = 0; s < chain.states; ++s) {
        // Poisson arrivals come at rate lambda whatever the state (the model's
        // definition, Kleinrock, Queueing Systems vol. 1, M/M/1/K).
        EXPECT_EQ(arrive[s], 1.8) << "state " << s;
        // The guard: no service at an empty queue.
        EXPECT_EQ(leave[s], queue[s] > 0 ? 2.0 : 0.0) << "state " << s;
    }

    // Lost arrivals per unit time, sum_s pi_s * arrive_s * [queue = K], against
    // lambda * p_K with p_n of M/M/c/K (Gross & Harris, Fundamentals of Queueing
    // Theory), coded in tests/support/test_chains.hpp.
    const auto pi = stationary(chain);
    const auto p = testing_support::mmck_closed_form(1, 4, 1.8, 2.0);
    double lost = 0, offered = 0;
    for (std::uint64_t s = 0; s < chain.states; ++s) {
        offered += pi[s] * arrive[s];
        if (queue[s] == 4)
            lost += pi[s] * arrive[s];
    }
    EXPECT_NEAR(lost, 1.8 * p[4], 1e-14);
    EXPECT_NEAR(offered, 1.8, 1e-14);

    // Final parameter values, in the model's order, the override applied.
    const std::vector<std::pair<std::string, double>> parameters{
        {"arrival", 1.8}, {"service", 2.0}, {"room", 4.0}};
    EXPECT_EQ(chain.parameters, parameters);
    EXPECT_EQ(chain.model_text, lossy_queue);
    EXPECT_EQ(chain.model_file, "queue.yaml");
}

TEST(EventIntensities, ManyStatesWithEitherLookup) {
    // Past the blocks in which intensities are laid out (4096 rows), with both
    // state tables.
    for (const auto lookup : {model::Lookup::direct, model::Lookup::hash}) {
        model::ExploreOptions options;
        options.lookup = lookup;
        const io::Chain chain = model::explore(
            model::parse_model(lossy_queue, "queue.yaml", {{"room", "9999"}}), options);
        ASSERT_EQ(chain.states, 10000u);
        const auto& queue = queue_of(chain);
        const auto& arrive = intensity(chain, "arrive").values;
        const auto& leave = intensity(chain, "leave").values;
        ASSERT_EQ(arrive.size(), chain.states);
        ASSERT_EQ(leave.size(), chain.states);
        std::uint64_t wrong = 0;
        for (std::uint64_t s = 0; s < chain.states; ++s)
            wrong += arrive[s] != 1.5 || leave[s] != (queue[s] > 0 ? 2.0 : 0.0);
        EXPECT_EQ(wrong, 0u);
    }
}

TEST(EventIntensities, DtmcIncludesSelfLoopsAndGuards) {
    // A queue observed once per slot: an arrival w.p. 0.3 (lost when full), a
    // departure w.p. 0.5 when not empty, otherwise nothing happens.
    const std::string yaml =
        "kind: dtmc\n"
        "leftover_probability: stay\n"
        "parameters: {p: 0.3, q: 0.5}\n"
        "variables: {queue: {from: 0, to: 3}}\n"
        "start: {queue: 0}\n"
        "events:\n"
        "  - {name: arrive, rate: p, then: {queue: \"min(queue + 1, 3)\"}}\n"
        "  - {name: leave, when: queue > 0, rate: q, then: {queue: queue - 1}}\n";
    const io::Chain chain = model::explore(model::parse_model(yaml, "slots.yaml"));
    ASSERT_EQ(chain.states, 4u);
    const auto& queue = queue_of(chain);
    const auto& arrive = intensity(chain, "arrive").values;
    const auto& leave = intensity(chain, "leave").values;
    for (std::uint64_t s = 0; s < chain.states; ++s) {
        EXPECT_EQ(arrive[s], 0.3) << "state " << s;
        EXPECT_EQ(leave[s], queue[s] > 0 ? 0.5 : 0.0) << "state " << s;
    }
    // At the full queue the lost arrival and the leftover both stay: merged into
    // one self-loop, whose label cannot tell them apart; the intensity can.
    std::uint64_t full = 0;
    while (queue[full] != 3)
        ++full;
    bool merged_self_loop = false;
    for (auto k = chain.offsets[full]; k < chain.offsets[full + 1]; ++k)
        if (chain.targets[k] == full) {
            merged_self_loop = chain.event_names[chain.events[k]] == model::several_events_label;
            EXPECT_NEAR(chain.weights[k], 0.3 + 0.2, 1e-15);
        }
    EXPECT_TRUE(merged_self_loop);
    // No stay/several entries: intensities are per model event only.
    EXPECT_EQ(chain.event_intensities.size(), 2u);
}

TEST(EventIntensities, ModelFileTextIsKept) {
    std::random_device rd;
    const auto path =
        std::filesystem::temp_directory_path() /
        ("longrun-intensity-" + std::to_string(::getpid()) + "-" + std::to_string(rd()) + ".yaml");
    const std::string text = "# a comment kept as written\n" + lossy_queue;
    std::ofstream(path, std::ios::binary) << text;
    const io::Chain chain = model::explore(model::read_model_file(path.string()));
    std::filesystem::remove(path);
    EXPECT_EQ(chain.model_file, path.string());
    EXPECT_EQ(chain.model_text, text);
    ASSERT_EQ(chain.parameters.size(), 3u);
    EXPECT_EQ(chain.parameters[0], (std::pair<std::string, double>{"arrival", 1.5}));
}

} // namespace
