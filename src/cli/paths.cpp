#include "paths.hpp"

#include "text_file.hpp"

#include "io/mpi_agree.hpp"

namespace longrun::cli {

void agree_on_outputs(MPI_Comm comm, const std::function<void()>& checks,
                      const std::vector<std::string>& probes, Writers writers) {
    bool probing = comm_rank(comm) == 0;
    if (writers == Writers::every_rank && !probes.empty()) {
        MPI_Comm node = MPI_COMM_NULL;
        MPI_Comm_split_type(comm, MPI_COMM_TYPE_SHARED, 0, MPI_INFO_NULL, &node);
        probing = comm_rank(node) == 0;
        MPI_Comm_free(&node);
    }
    agree_on_local_work(comm, [&] {
        checks();
        if (probing)
            for (const auto& path : probes)
                probe_writable(path);
    });
}

} // namespace longrun::cli
