// GoogleTest main for MPI tests: starts MPI (through SLEPc/PETSc), lets only rank 0
// print the usual report, makes other ranks print their own failures with their
// rank, and agrees on one verdict so that every rank exits with the same code.
#include <gtest/gtest.h>
#include <mpi.h>
#include <slepcsys.h>

#include <cstdio>

namespace {

class RankFailurePrinter : public testing::EmptyTestEventListener {
  public:
    explicit RankFailurePrinter(int rank) : rank_(rank) {}
    void OnTestPartResult(const testing::TestPartResult& r) override {
        if (r.failed())
            std::fprintf(stderr, "[rank %d] %s:%d: failure\n%s\n", rank_,
                         r.file_name() ? r.file_name() : "?", r.line_number(), r.summary());
    }

  private:
    int rank_;
};

} // namespace

int main(int argc, char** argv) {
    testing::InitGoogleTest(&argc, argv);
    // No options file, no command-line options for PETSc: the tests set their own.
    int fake_argc = 1;
    char** fake_argv = argv;
    if (SlepcInitialize(&fake_argc, &fake_argv, nullptr, nullptr) != 0)
        return 99;
    // PETSc errors become exceptions, as in the longrun executable.
    PetscPushErrorHandler(PetscReturnErrorHandler, nullptr);
    int rank = 0;
    MPI_Comm_rank(MPI_COMM_WORLD, &rank);
    auto& listeners = testing::UnitTest::GetInstance()->listeners();
    if (rank != 0) {
        delete listeners.Release(listeners.default_result_printer());
        listeners.Append(new RankFailurePrinter(rank));
    }
    int local_failed = RUN_ALL_TESTS() != 0 ? 1 : 0;
    int any_failed = 0;
    MPI_Allreduce(&local_failed, &any_failed, 1, MPI_INT, MPI_MAX, MPI_COMM_WORLD);
    if (rank == 0 && any_failed && !local_failed)
        std::fprintf(stderr, "tests failed on another rank (see its [rank N] lines)\n");
    SlepcFinalize();
    return any_failed;
}
