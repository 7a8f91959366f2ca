// Runs a program the way a batch script would and hands back what a script
// sees: the exit code and the two output streams. Header-only so that every CLI
// test folder can use it without another library.
//
// The child gets its own process group: a timeout then kills mpirun together
// with the ranks it started, so a hung job fails one test instead of the run.
#pragma once

#include <fcntl.h>
#include <grp.h>
#include <signal.h>
#include <sys/resource.h>
#include <sys/stat.h>
#include <sys/types.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cstdint>
#include <cstdlib>
#include <fstream>
#include <optional>
#include <sstream>
#include <stdexcept>
#include <string>
#include <thread>
#include <vector>

namespace longrun::test {

struct CommandOptions {
    std::chrono::seconds timeout{120};
    std::string working_directory; // empty: the caller's
    // Root ignores file permissions; to see "permission denied" a test running as
    // root has the child drop to this user and group (e.g. 65534, nobody).
    std::optional<uid_t> run_as;
    // RLIMIT_AS for the child in bytes (0: none). Catches an allocation sized by
    // a number read from a file before that number was checked.
    std::uint64_t address_space_limit = 0;
};

struct CommandResult {
    int exit_code = -1; // exit status; 128 + signal number if killed by a signal
    int signal = 0;     // the terminating signal, 0 if the program exited
    bool timed_out = false;
    double seconds = 0;
    std::string out, err;

    // Everything a failure message needs to show what the program did.
    std::string describe() const {
        std::ostringstream s;
        s << "exit " << exit_code;
        if (signal)
            s << " (signal " << signal << ")";
        if (timed_out)
            s << " (timed out)";
        s << "\n--- stderr ---\n" << err << "--- stdout ---\n" << out << "---";
        return s.str();
    }
};

namespace detail {

inline std::string slurp(const std::string& path) {
    std::ifstream in(path, std::ios::binary);
    std::ostringstream s;
    s << in.rdbuf();
    return s.str();
}

// Only async-signal-safe calls between fork and exec.
[[noreturn]] inline void exec_child(char* const* argv, const char* out, const char* err,
                                    const char* cwd, const CommandOptions& o) {
    setpgid(0, 0);
    const int in_fd = open("/dev/null", O_RDONLY);
    const int out_fd = open(out, O_WRONLY | O_CREAT | O_TRUNC, 0644);
    const int err_fd = open(err, O_WRONLY | O_CREAT | O_TRUNC, 0644);
    if (in_fd < 0 || out_fd < 0 || err_fd < 0 || dup2(in_fd, 0) < 0 || dup2(out_fd, 1) < 0 ||
        dup2(err_fd, 2) < 0)
        _exit(126);
    if (cwd && chdir(cwd) != 0)
        _exit(126);
    if (o.address_space_limit > 0) {
        const rlimit limit{o.address_space_limit, o.address_space_limit};
        if (setrlimit(RLIMIT_AS, &limit) != 0)
            _exit(126);
    }
    if (o.run_as &&
        (setgroups(0, nullptr) != 0 || setgid(*o.run_as) != 0 || setuid(*o.run_as) != 0))
        _exit(126);
    execv(argv[0], argv);
    _exit(127);
}

} // namespace detail

// argv[0] must be a path (no PATH search): tests name exactly what they run.
inline CommandResult run_command(const std::vector<std::string>& argv,
                                 const CommandOptions& options = {}) {
    if (argv.empty())
        throw std::invalid_argument("run_command: empty command line");
    char scratch[] = "/tmp/longrun-run-XXXXXX";
    if (!mkdtemp(scratch))
        throw std::runtime_error("run_command: cannot create a scratch folder");
    const std::string dir = scratch;
    const std::string out_path = dir + "/stdout", err_path = dir + "/stderr";
    if (options.run_as) // the child opens these after dropping privileges
        chmod(scratch, 0777);

    std::vector<char*> cargv;
    for (const auto& a : argv)
        cargv.push_back(const_cast<char*>(a.c_str()));
    cargv.push_back(nullptr);
    const char* cwd =
        options.working_directory.empty() ? nullptr : options.working_directory.c_str();

    const auto start = std::chrono::steady_clock::now();
    const pid_t pid = fork();
    if (pid < 0)
        throw std::runtime_error("run_command: fork failed");
    if (pid == 0)
        detail::exec_child(cargv.data(), out_path.c_str(), err_path.c_str(), cwd, options);
    // Also here, so that a kill right after fork cannot miss the group.
    setpgid(pid, pid);

    CommandResult result;
    int status = 0;
    while (true) {
        const pid_t done = waitpid(pid, &status, WNOHANG);
        if (done == pid)
            break;
        if (done < 0)
            throw std::runtime_error("run_command: waitpid failed");
        if (std::chrono::steady_clock::now() - start > options.timeout) {
            result.timed_out = true;
            kill(-pid, SIGKILL);
            waitpid(pid, &status, 0);
            break;
        }
        std::this_thread::sleep_for(std::chrono::milliseconds(10));
    }
    result.seconds =
        std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
    if (WIFEXITED(status)) {
        result.exit_code = WEXITSTATUS(status);
    } else if (WIFSIGNALED(status)) {
        result.signal = WTERMSIG(status);
        result.exit_code = 128 + result.signal;
    }
    result.out = detail::slurp(out_path);
    result.err = detail::slurp(err_path);
    unlink(out_path.c_str());
    unlink(err_path.c_str());
    rmdir(scratch);
    return result;
}

// Splits text into lines; a trailing newline does not make an empty last line.
inline std::vector<std::string> lines_of(const std::string& text) {
    std::vector<std::string> lines;
    std::istringstream in(text);
    for (std::string line; std::getline(in, line);)
        lines.push_back(line);
    return lines;
}

} // namespace longrun::test
