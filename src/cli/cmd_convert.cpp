// `longrun convert`: Matrix Market <-> chain file, validated on the way in.
#include "chain_input.hpp"
#include "commands.hpp"
#include "option_range.hpp"
#include "paths.hpp"

#include "io/chain_file.hpp"
#include "io/format.hpp"
#include "io/matrix_market.hpp"
#include "io/mpi_agree.hpp"

#include <fmt/format.h>

#include <fstream>
#include <memory>

namespace longrun::cli {

namespace {

// HDF5 refuses chunks of 4 GiB or more: 2^29 - 1 values of 8 bytes is the longest.
constexpr std::uint64_t longest_chunk = (std::uint64_t{1} << 29) - 1;

struct ConvertOptions {
    std::string input, output, kind;
    bool transposed = false;
    io::ValidationOptions validation;
    std::uint64_t chunk = 0;
    int deflate = 0;
};

bool looks_like_matrix_market(const std::string& path) {
    std::ifstream in(path, std::ios::binary);
    char head[14] = {};
    in.read(head, sizeof head);
    return std::string(head, static_cast<std::size_t>(in.gcount())) == "%%MatrixMarket";
}

int convert(MPI_Comm comm, const ConvertOptions& o) {
    agree_on_outputs(comm,
                     [&] {
                         require_distinct(o.input, o.output);
                         require_output_file(o.output);
                     },
                     {o.output});
    // The extension counts too: a .mtx file with a damaged banner must be refused
    // by the Matrix Market reader, which names the line, not by the HDF5 one.
    const bool from_mtx = looks_like_matrix_market(o.input) || has_extension(o.input, ".mtx");
    const bool to_mtx = has_extension(o.output, ".mtx");
    if (from_mtx && to_mtx)
        throw UsageError("both files are Matrix Market; convert goes between Matrix Market and "
                         "a chain file (.h5)");
    if (!from_mtx && o.transposed)
        throw UsageError("--transposed is only for Matrix Market input; a chain file's rows are "
                         "always its source states");
    if (from_mtx && o.kind.empty())
        throw UsageError("a Matrix Market file does not say whether it holds rates or "
                         "probabilities: give --kind ctmc or --kind dtmc");
    std::string summary;
    agree_on_local_work(comm, [&] {
        if (comm_rank(comm) != 0)
            return;
        io::ValidationReport report;
        if (from_mtx) {
            io::Chain chain = io::read_matrix_market(
                o.input, *io::parse_kind(o.kind),
                {.transposed = o.transposed, .row_sum_tolerance = o.validation.row_sum_tolerance});
            if (auto fault = io::validate_slice(chain, o.input, o.validation, report))
                throw in_matrix_market_terms(*fault, o.input, o.transposed);
            io::write_chain_file(o.output, chain, {o.chunk, o.deflate});
            summary = fmt::format("wrote {}: {} chain, {} states, {} transitions", o.output,
                                  io::to_string(chain.kind), chain.states, chain.transitions);
        } else {
            if (!o.kind.empty())
                throw UsageError("--kind is only for Matrix Market input; a chain file says "
                                 "its kind itself");
            io::Chain chain = io::read_whole_chain(o.input, o.validation, &report);
            if (to_mtx)
                io::write_matrix_market(o.output, chain);
            else
                io::write_chain_file(o.output, chain, {o.chunk, o.deflate});
            summary = fmt::format("wrote {}: {} chain, {} states, {} transitions", o.output,
                                  io::to_string(chain.kind), chain.states, chain.transitions);
        }
        if (report.renormalized_rows > 0)
            summary += fmt::format("; renormalized {} row(s), largest correction {}",
                                   report.renormalized_rows, fmt_double(report.largest_correction));
        if (report.ctmc_self_loops > 0)
            summary += fmt::format("; warning: {} rate(s) from a state to itself are ignored",
                                   report.ctmc_self_loops);
    });
    if (comm_rank(comm) == 0)
        std::printf("%s\n", summary.c_str());
    return 0;
}

} // namespace

Action add_convert(CLI::App& app) {
    auto o = std::make_shared<ConvertOptions>();
    auto* sub = app.add_subcommand(
        "convert",
        "Convert between Matrix Market and longrun chain files.\n"
        "  longrun convert rates.mtx chain.h5 --kind ctmc   (rows are source states; a ctmc\n"
        "                                                    generator's diagonal is dropped)\n"
        "  longrun convert chain.h5 back.mtx                 (a ctmc is written as Q with its\n"
        "                                                    diagonal)\n"
        "The input is validated; a dtmc whose rows do not sum to 1 is refused unless\n"
        "--renormalize is given, and so is a generator whose diagonal is not minus its row's\n"
        "rates. A file that stores the transposed matrix (column j holds the transitions out\n"
        "of state j) is read with --transposed.");
    // Existence is the reader's check (exit 2), as for `solve`.
    sub->footer("Exit codes: 0 done, 1 usage error, 2 bad input, 3 no unique stationary\n"
                "distribution, 4 no certified answer within tolerance, 6 output not written.");
    sub->add_option("input", o->input, "Matrix Market (.mtx) or chain file (.h5)")->required();
    sub->add_option("output", o->output, "output file: .mtx for Matrix Market, else chain file")
        ->required();
    sub->add_option("--kind", o->kind, "ctmc (rates) or dtmc (probabilities), for .mtx input")
        ->check(CLI::IsMember({"ctmc", "dtmc"}));
    sub->add_flag("--transposed", o->transposed,
                  "the .mtx input holds the transposed matrix (P^T or Q^T): column j lists the "
                  "transitions out of state j, so columns, not rows, sum to 1 (or 0)");
    add_validation_options(sub, o->validation);
    sub->add_option("--chunk", o->chunk,
                    "HDF5 chunk length in elements (0: 131072); every chunk carries a checksum "
                    "that each read verifies")
        ->default_val(0)
        ->check(whole_number_in(0, longest_chunk));
    sub->add_option("--deflate", o->deflate, "deflate level 1-9 (0: none)")
        ->default_val(0)
        ->check(whole_number_in(0, 9));
    return [o](MPI_Comm comm) { return convert(comm, *o); };
}

} // namespace longrun::cli
