// `longrun check`: the structure of a chain without solving it.
#include "commands.hpp"
#include "load.hpp"
#include "structure_report.hpp"

#include "analysis/structure.hpp"
#include "io/mpi_agree.hpp"

#include <cstdio>
#include <memory>

namespace longrun::cli {

namespace {

struct CheckOptions {
    std::string chain;
    io::ValidationOptions validation;
    bool json = false;
};

int check_command(MPI_Comm comm, const CheckOptions& o) {
    const LoadedChain loaded = load_chain(o.chain, comm, o.validation);
    const auto s = analysis::analyse(comm, local_rows_of(loaded.chain));
    const StructureWords words = describe_structure(comm, loaded.chain, s);
    if (comm_rank(comm) == 0) {
        if (o.json) {
            auto j = words.json;
            j["path"] = o.chain;
            std::printf("%s\n", j.dump(2).c_str());
        } else {
            std::printf("file         %s\n%s", o.chain.c_str(), words.text.c_str());
        }
        std::fflush(stdout);
    }
    return s.unique() ? 0 : static_cast<int>(ExitCode::no_unique);
}

} // namespace

Action add_check(CLI::App& app) {
    auto o = std::make_shared<CheckOptions>();
    auto* sub = app.add_subcommand(
        "check",
        "Describe a chain's structure without solving it: degrees, self-loops, strongly\n"
        "connected components, closed classes (with up to 10 representative states each and\n"
        "their variable values), transient and absorbing states, and for a dtmc the period\n"
        "of each closed class. A unique stationary distribution exists exactly when there is\n"
        "one closed class.\n"
        "  longrun check chain.h5\n"
        "  longrun check chain.h5 --json");
    sub->footer("Exit codes: 0 a unique stationary distribution exists, 3 it does not,\n"
                "1 usage error, 2 bad input.");
    sub->add_option("chain", o->chain, "chain file (HDF5, longrun.chain v1)")->required();
    sub->add_flag("--json", o->json, "print the report as one JSON object on stdout");
    add_validation_options(sub, o->validation);
    return [o](MPI_Comm comm) { return check_command(comm, *o); };
}

} // namespace longrun::cli
