// longrun: the command-line front end. Turns typed errors into one line on
// stderr and a distinct exit code; everything after a lone "--" goes to PETSc's
// options database (e.g. -- -linear_ksp_type bcgs -eigen_eps_ncv 40).
#include "commands.hpp"
#include "stop_signal.hpp"

#include "io/error.hpp"
#include "io/mpi_agree.hpp"
#include "solve/petsc_error.hpp"

#include <slepcsys.h>

#include <algorithm>
#include <cstdio>
#include <optional>
#include <string>
#include <vector>

#ifndef LONGRUN_VERSION
#define LONGRUN_VERSION "dev"
#endif

namespace {

constexpr const char* description =
    "longrun computes the long-run (stationary) distribution of a large sparse Markov chain,\n"
    "certifies it with a residual, and summarises it (means, quantiles, tail masses).\n"
    "Run it under mpirun to spread a chain over many ranks.\n\n"
    "Exit codes: 0 done, 1 usage error, 2 bad input, 3 no unique stationary distribution,\n"
    "4 no certified answer within tolerance, 5 a simulation disagrees with a solved result,\n"
    "6 the result could not be written, 7 stopped by SIGTERM/SIGINT (resume it).\n\n"
    "PETSc/SLEPc options go after a lone '--', with the method's prefix, for example:\n"
    "  longrun solve chain.h5 -o result.h5 --method linear -- -linear_ksp_type bcgs\n";

void report_error(int rank, const std::string& message) {
    // Agreed errors are printed once; a rank-local one names its rank.
    if (rank >= 0)
        std::fprintf(stderr, "longrun: error (rank %d): %s\n", rank, message.c_str());
    else
        std::fprintf(stderr, "longrun: error: %s\n", message.c_str());
}

} // namespace

int main(int argc, char** argv) {
    std::vector<std::string> ours, petsc_args;
    bool after_separator = false;
    for (int i = 0; i < argc; ++i) {
        const std::string arg = argv[i];
        if (!after_separator && arg == "--" && i > 0) {
            after_separator = true;
            continue;
        }
        (after_separator ? petsc_args : ours).push_back(arg);
    }

    int petsc_argc = 1;
    char** petsc_argv = argv;
    if (SlepcInitialize(&petsc_argc, &petsc_argv, nullptr, nullptr) != 0) {
        std::fprintf(stderr, "longrun: error: PETSc/SLEPc could not start\n");
        return 4;
    }
    longrun::solve::use_exceptions_for_petsc_errors();
    MPI_Comm comm = PETSC_COMM_WORLD;
    int rank = 0, size = 1;
    MPI_Comm_rank(comm, &rank);
    MPI_Comm_size(comm, &size);

    CLI::App app{description, "longrun"};
    app.set_version_flag("--version", std::string("longrun ") + LONGRUN_VERSION);
    app.require_subcommand(1);
    app.fallthrough();
    std::vector<std::pair<CLI::App*, longrun::cli::Action>> verbs;
    std::string options_file;
    app.add_option("--options-file", options_file,
                   "PETSc/SLEPc options database file (one option per line)")
        ->check(CLI::ExistingFile);
    for (auto add :
         {longrun::cli::add_convert, longrun::cli::add_check, longrun::cli::add_solve,
          longrun::cli::add_generate, longrun::cli::add_compare, longrun::cli::add_summarize,
          longrun::cli::add_sweep, longrun::cli::add_simulate}) {
        const auto before = app.get_subcommands({}).size();
        auto action = add(app);
        verbs.emplace_back(app.get_subcommands({})[before], std::move(action));
    }

    int code = 0;
    std::vector<const char*> cargs;
    for (const auto& s : ours)
        cargs.push_back(s.c_str());
    // The command line is the same on every rank, but what some checks see is not
    // (--options-file on a node-local disk): a rank that refuses it alone must not
    // leave the others waiting, so every rank learns the verdict.
    std::optional<longrun::LocalFault> refused;
    try {
        app.parse(static_cast<int>(cargs.size()), cargs.data());
    } catch (const CLI::ParseError& e) {
        if (e.get_exit_code() == 0) { // --help, --version: nothing to agree on
            if (rank == 0)
                app.exit(e);
            SlepcFinalize();
            return 0;
        }
        // One line like every other error: batch logs are read with grep.
        std::string what = e.what();
        std::replace(what.begin(), what.end(), '\n', ' ');
        refused = longrun::LocalFault{0, longrun::ExitCode::usage, what + " (see longrun --help)"};
    }
    try {
        longrun::agree_or_throw(comm, refused);
    } catch (const longrun::Error& e) {
        if (rank == 0)
            report_error(-1, e.what());
        SlepcFinalize();
        return 1;
    }

    std::string joined;
    for (const auto& a : petsc_args)
        joined += a + " ";
    if (!joined.empty())
        PetscOptionsInsertString(nullptr, joined.c_str());
    if (!options_file.empty())
        PetscOptionsInsertFile(comm, nullptr, options_file.c_str(), PETSC_TRUE);

    try {
        for (auto& [sub, action] : verbs)
            if (sub->parsed()) {
                // Only solve knows how to stop cleanly (a checkpoint, exit 7); the
                // other verbs keep the default: a signal ends them at once.
                if (sub->get_name() == "solve")
                    longrun::cli::install_stop_handlers();
                code = action(comm);
            }
    } catch (const longrun::Error& e) {
        code = static_cast<int>(e.code());
        if (e.code() == longrun::ExitCode::interrupted && e.agreed()) {
            if (rank == 0) // not an error: the job was told to stop
                std::fprintf(stderr, "longrun: %s\n", e.what());
        } else if (e.agreed() || e.code() == longrun::ExitCode::usage) {
            if (rank == 0)
                report_error(-1, e.what());
        } else {
            report_error(size > 1 ? rank : -1, e.what());
            if (size > 1) // the other ranks may be waiting in a collective call
                MPI_Abort(comm, code);
        }
    } catch (const std::exception& e) {
        report_error(size > 1 ? rank : -1, std::string("internal error: ") + e.what());
        code = 70;
        if (size > 1)
            MPI_Abort(comm, code);
    }
    SlepcFinalize();
    return code;
}
