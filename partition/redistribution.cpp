#include "redistribution.hpp"

#include "contiguous.hpp"
#include "lookup.hpp"

#include <algorithm>
#include <numeric>

namespace longrun::partition {

namespace {

std::vector<int> displacements(const std::vector<int>& counts) {
    std::vector<int> d(counts.size(), 0);
    for (std::size_t i = 1; i < counts.size(); ++i)
        d[i] = d[i - 1] + counts[i - 1];
    return d;
}

// Runs one all-to-all of fixed-size records, `bytes` each.
void all_to_all(MPI_Comm comm, const void* send, const std::vector<int>& send_counts,
                const std::vector<int>& send_displs, void* receive,
                const std::vector<int>& receive_counts, const std::vector<int>& receive_displs,
                std::size_t bytes) {
    MPI_Datatype record;
    MPI_Type_contiguous(static_cast<int>(bytes), MPI_BYTE, &record);
    MPI_Type_commit(&record);
    MPI_Alltoallv(send, send_counts.data(), send_displs.data(), record, receive,
                  receive_counts.data(), receive_displs.data(), record, comm);
    MPI_Type_free(&record);
}

} // namespace

Redistribution::Redistribution(MPI_Comm comm, RowRange file_rows,
                               std::span<const std::uint64_t> part)
    : comm_(comm), file_rows_(file_rows) {
    int size = 1, rank = 0;
    MPI_Comm_size(comm, &size);
    MPI_Comm_rank(comm, &rank);
    const auto parts = static_cast<std::size_t>(size);
    file_ranges_ = gather_ranges(comm, file_rows);

    std::vector<std::uint64_t> mine(parts, 0), before(parts, 0), total(parts, 0);
    for (std::uint64_t p : part)
        ++mine[p];
    MPI_Exscan(mine.data(), before.data(), size, MPI_UINT64_T, MPI_SUM, comm);
    if (rank == 0)
        std::fill(before.begin(), before.end(), 0); // MPI_Exscan leaves rank 0's undefined
    MPI_Allreduce(mine.data(), total.data(), size, MPI_UINT64_T, MPI_SUM, comm);
    std::vector<std::uint64_t> block(parts + 1, 0);
    for (std::size_t p = 0; p < parts; ++p)
        block[p + 1] = block[p] + total[p];
    new_rows_ = {block[static_cast<std::size_t>(rank)], block[static_cast<std::size_t>(rank) + 1]};

    std::vector<std::uint64_t> next(parts);
    for (std::size_t p = 0; p < parts; ++p)
        next[p] = block[p] + before[p];
    new_index_.resize(part.size());
    for (std::size_t i = 0; i < part.size(); ++i)
        new_index_[i] = next[part[i]]++;

    send_counts_.assign(parts, 0);
    for (std::uint64_t p : part)
        ++send_counts_[p];
    send_displs_ = displacements(send_counts_);
    send_order_.resize(part.size());
    {
        std::vector<int> fill = send_displs_;
        for (std::size_t i = 0; i < part.size(); ++i)
            send_order_[static_cast<std::size_t>(fill[part[i]]++)] = i;
    }
    receive_counts_.assign(parts, 0);
    MPI_Alltoall(send_counts_.data(), 1, MPI_INT, receive_counts_.data(), 1, MPI_INT, comm);
    receive_displs_ = displacements(receive_counts_);
    std::vector<std::uint64_t> sent(part.size());
    for (std::size_t k = 0; k < sent.size(); ++k)
        sent[k] = new_index_[send_order_[k]];
    receive_position_.resize(new_rows_.size());
    all_to_all(comm, sent.data(), send_counts_, send_displs_, receive_position_.data(),
               receive_counts_, receive_displs_, sizeof(std::uint64_t));
    for (auto& r : receive_position_)
        r -= new_rows_.begin;
}

void Redistribution::exchange(const void* from, void* to, std::size_t bytes, bool forward) const {
    const auto* in = static_cast<const unsigned char*>(from);
    auto* out = static_cast<unsigned char*>(to);
    if (forward) {
        std::vector<unsigned char> packed(send_order_.size() * bytes),
            arrived(new_rows_.size() * bytes);
        for (std::size_t k = 0; k < send_order_.size(); ++k)
            std::copy_n(in + send_order_[k] * bytes, bytes, packed.data() + k * bytes);
        all_to_all(comm_, packed.data(), send_counts_, send_displs_, arrived.data(),
                   receive_counts_, receive_displs_, bytes);
        for (std::size_t k = 0; k < receive_position_.size(); ++k)
            std::copy_n(arrived.data() + k * bytes, bytes, out + receive_position_[k] * bytes);
    } else {
        std::vector<unsigned char> packed(new_rows_.size() * bytes),
            arrived(send_order_.size() * bytes);
        for (std::size_t k = 0; k < receive_position_.size(); ++k)
            std::copy_n(in + receive_position_[k] * bytes, bytes, packed.data() + k * bytes);
        all_to_all(comm_, packed.data(), receive_counts_, receive_displs_, arrived.data(),
                   send_counts_, send_displs_, bytes);
        for (std::size_t k = 0; k < send_order_.size(); ++k)
            std::copy_n(arrived.data() + k * bytes, bytes, out + send_order_[k] * bytes);
    }
}

MovedRows Redistribution::move(const CsrView& csr, std::span<const double> weights) const {
    int size = 1;
    MPI_Comm_size(comm_, &size);
    const std::vector<std::uint64_t> renumbered =
        look_up(comm_, file_ranges_, new_index_, csr.targets);

    // Row lengths travel like any per-row value; the entries follow in send order.
    std::vector<std::uint64_t> length(csr.rows.size());
    for (std::size_t i = 0; i < length.size(); ++i)
        length[i] = csr.offsets[i + 1] - csr.offsets[i];
    const std::vector<std::uint64_t> new_length = to_new_order<std::uint64_t>(length);

    std::vector<int> entry_send(static_cast<std::size_t>(size), 0),
        entry_receive(static_cast<std::size_t>(size), 0);
    struct Entry {
        std::uint64_t target;
        double weight;
    };
    std::vector<Entry> packed;
    packed.reserve(csr.targets.size());
    for (int r = 0, k = 0; r < size; ++r)
        for (int c = 0; c < send_counts_[static_cast<std::size_t>(r)]; ++c, ++k) {
            const std::uint64_t i = send_order_[static_cast<std::size_t>(k)];
            for (std::uint64_t e = csr.offsets[i]; e < csr.offsets[i + 1]; ++e)
                packed.push_back({renumbered[e], weights[e]});
            entry_send[static_cast<std::size_t>(r)] += static_cast<int>(length[i]);
        }
    MPI_Alltoall(entry_send.data(), 1, MPI_INT, entry_receive.data(), 1, MPI_INT, comm_);
    const auto send_displs = displacements(entry_send);
    const auto receive_displs = displacements(entry_receive);
    std::vector<Entry> arrived(
        static_cast<std::size_t>(receive_displs.back() + entry_receive.back()));
    all_to_all(comm_, packed.data(), entry_send, send_displs, arrived.data(), entry_receive,
               receive_displs, sizeof(Entry));
    std::vector<Entry>().swap(packed);

    MovedRows out;
    out.rows = new_rows_;
    out.offsets.resize(new_rows_.size() + 1, 0);
    for (std::size_t i = 0; i < new_length.size(); ++i)
        out.offsets[i + 1] = out.offsets[i] + new_length[i];
    out.targets.resize(arrived.size());
    out.weights.resize(arrived.size());
    // Arrived rows come in receive order; receive_position_ says where each goes.
    std::size_t a = 0;
    for (std::size_t k = 0; k < receive_position_.size(); ++k) {
        const std::uint64_t row = receive_position_[k];
        const std::uint64_t begin = out.offsets[row], n = new_length[row];
        std::sort(arrived.begin() + static_cast<std::ptrdiff_t>(a),
                  arrived.begin() + static_cast<std::ptrdiff_t>(a + n),
                  [](const Entry& x, const Entry& y) { return x.target < y.target; });
        for (std::uint64_t e = 0; e < n; ++e) {
            out.targets[begin + e] = arrived[a + e].target;
            out.weights[begin + e] = arrived[a + e].weight;
        }
        a += n;
    }
    return out;
}

} // namespace longrun::partition
