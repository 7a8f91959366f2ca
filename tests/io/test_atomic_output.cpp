// The rename that puts an output in place is the last line of defence: whatever
// the command line let through, nothing but a regular file is ever replaced. A
// device, fifo or folder that appears under the final name while the output is
// being written stays as it is, the temporary file goes, and every rank gets the
// same error; a symbolic link to a regular file is written through.
#include "io/atomic_output.hpp"
#include "io/error.hpp"
#include "io/mpi_agree.hpp"

#include <gtest/gtest.h>
#include <mpi.h>
#include <sys/stat.h>

#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <string>

namespace longrun::io {
namespace {

namespace fs = std::filesystem;

// A folder all ranks share, made by rank 0.
class SharedFolder {
  public:
    SharedFolder() {
        std::string name;
        if (comm_rank(MPI_COMM_WORLD) == 0) {
            std::string pattern = (fs::temp_directory_path() / "longrun-atomic-XXXXXX").string();
            if (mkdtemp(pattern.data()))
                name = pattern;
        }
        unsigned long n = name.size();
        MPI_Bcast(&n, 1, MPI_UNSIGNED_LONG, 0, MPI_COMM_WORLD);
        name.resize(n);
        MPI_Bcast(name.data(), static_cast<int>(n), MPI_CHAR, 0, MPI_COMM_WORLD);
        path_ = name;
    }
    ~SharedFolder() {
        MPI_Barrier(MPI_COMM_WORLD);
        std::error_code ignored;
        if (comm_rank(MPI_COMM_WORLD) == 0)
            fs::remove_all(path_, ignored);
    }
    const fs::path& path() const { return path_; }

  private:
    fs::path path_;
};

std::size_t temporaries_in(const fs::path& folder) {
    std::size_t n = 0;
    for (const auto& e : fs::directory_iterator(folder))
        if (e.path().filename().string().find(".tmp-") != std::string::npos)
            ++n;
    return n;
}

void write_into(const std::string& path, const char* text) {
    std::ofstream(path, std::ios::binary) << text;
}

// Every rank: the commit of a collective output whose final name became `what`
// before the rename. Returns the error's message ("" when none was thrown).
std::string commit_onto(const fs::path& final_path, int& code, bool& agreed) {
    std::string message;
    try {
        AtomicOutput out(final_path.string(), MPI_COMM_WORLD);
        if (comm_rank(MPI_COMM_WORLD) == 0)
            write_into(out.temporary(), "finished output\n");
        MPI_Barrier(MPI_COMM_WORLD);
        out.commit();
    } catch (const Error& e) {
        message = e.what();
        code = static_cast<int>(e.code());
        agreed = e.agreed();
    }
    return message;
}

TEST(AtomicOutput, RenameNeverReplacesAFifo) {
    SharedFolder folder;
    const fs::path fifo = folder.path() / "result.h5";
    if (comm_rank(MPI_COMM_WORLD) == 0) {
        EXPECT_EQ(::mkfifo(fifo.c_str(), 0600), 0);
    }
    MPI_Barrier(MPI_COMM_WORLD);
    int code = 0;
    bool agreed = false;
    const std::string message = commit_onto(fifo, code, agreed);
    MPI_Barrier(MPI_COMM_WORLD);
    EXPECT_EQ(code, static_cast<int>(ExitCode::output_failed)) << message;
    EXPECT_TRUE(agreed || comm_size(MPI_COMM_WORLD) == 1) << message;
    EXPECT_NE(message.find(fifo.string()), std::string::npos) << message;
    EXPECT_NE(message.find("fifo"), std::string::npos) << message;
    EXPECT_TRUE(fs::is_fifo(fifo)) << "the fifo was replaced";
    EXPECT_EQ(temporaries_in(folder.path()), 0u) << "the temporary file was left behind";
}

TEST(AtomicOutput, RenameNeverReplacesAFolder) {
    SharedFolder folder;
    const fs::path inside = folder.path() / "result.h5";
    if (comm_rank(MPI_COMM_WORLD) == 0) {
        fs::create_directory(inside);
        write_into((inside / "keep.txt").string(), "kept\n");
    }
    MPI_Barrier(MPI_COMM_WORLD);
    int code = 0;
    bool agreed = false;
    const std::string message = commit_onto(inside, code, agreed);
    MPI_Barrier(MPI_COMM_WORLD);
    EXPECT_EQ(code, static_cast<int>(ExitCode::output_failed)) << message;
    EXPECT_NE(message.find("a folder"), std::string::npos) << message;
    EXPECT_TRUE(fs::is_directory(inside));
    EXPECT_TRUE(fs::exists(inside / "keep.txt"));
    EXPECT_EQ(temporaries_in(folder.path()), 0u);
}

TEST(AtomicOutput, ReplacesARegularFile) {
    SharedFolder folder;
    const fs::path file = folder.path() / "result.h5";
    if (comm_rank(MPI_COMM_WORLD) == 0)
        write_into(file.string(), "old\n");
    MPI_Barrier(MPI_COMM_WORLD);
    int code = 0;
    bool agreed = false;
    const std::string message = commit_onto(file, code, agreed);
    MPI_Barrier(MPI_COMM_WORLD);
    EXPECT_EQ(message, "");
    std::ifstream in(file);
    std::string line;
    std::getline(in, line);
    EXPECT_EQ(line, "finished output");
}

TEST(AtomicOutput, WritesThroughALinkToARegularFile) {
    SharedFolder folder;
    const fs::path target = folder.path() / "target.h5";
    const fs::path link = folder.path() / "link.h5";
    if (comm_rank(MPI_COMM_WORLD) == 0) {
        write_into(target.string(), "old\n");
        fs::create_symlink(target, link);
    }
    MPI_Barrier(MPI_COMM_WORLD);
    int code = 0;
    bool agreed = false;
    const std::string message = commit_onto(link, code, agreed);
    MPI_Barrier(MPI_COMM_WORLD);
    EXPECT_EQ(message, "");
    EXPECT_TRUE(fs::is_symlink(link)) << "the link was replaced by a file";
    std::ifstream in(target);
    std::string line;
    std::getline(in, line);
    EXPECT_EQ(line, "finished output");
}

TEST(Unreplaceable, SaysWhatIsThere) {
    SharedFolder folder;
    if (comm_rank(MPI_COMM_WORLD) != 0)
        return;
    const fs::path file = folder.path() / "file";
    write_into(file.string(), "x");
    fs::create_symlink(file, folder.path() / "to-file");
    fs::create_symlink("/dev/null", folder.path() / "to-device");
    fs::create_symlink(folder.path() / "absent", folder.path() / "to-nothing");
    ASSERT_EQ(::mkfifo((folder.path() / "fifo").c_str(), 0600), 0);
    EXPECT_EQ(unreplaceable((folder.path() / "absent").string()), "");
    EXPECT_EQ(unreplaceable(file.string()), "");
    EXPECT_EQ(unreplaceable((folder.path() / "to-file").string()), "");
    EXPECT_EQ(unreplaceable("/dev/null"), "a device");
    EXPECT_EQ(unreplaceable(folder.path().string()), "a folder");
    EXPECT_EQ(unreplaceable((folder.path() / "fifo").string()), "a named pipe (fifo)");
    EXPECT_EQ(unreplaceable((folder.path() / "to-device").string()), "a symbolic link to a device");
    EXPECT_EQ(unreplaceable((folder.path() / "to-nothing").string()), "a symbolic link to nothing");
}

} // namespace
} // namespace longrun::io
