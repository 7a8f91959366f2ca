// Writes the hand-made sample summary (sample_summary.hpp) as an HTML report, for
// the browser check in tests/e2e/report_render.py, until `longrun summarize
// --report` takes its place there.
//
//   write_sample_report OUT.html [--corrupt-images | --truncate-images]
//
// --corrupt-images overwrites the start of every embedded PNG (its signature and
// header); --truncate-images cuts each one in half, which a browser still shows
// in part. Either way the browser check has a report it must refuse.
#include "cli/summary_html.hpp"
#include "sample_summary.hpp"

#include <filesystem>
#include <fstream>
#include <iostream>
#include <iterator>
#include <string>

int main(int argc, char** argv) {
    const std::string damage = argc == 3 ? argv[2] : "";
    if (argc < 2 || argc > 3 ||
        (argc == 3 && damage != "--corrupt-images" && damage != "--truncate-images")) {
        std::cerr << "usage: write_sample_report OUT.html [--corrupt-images | "
                     "--truncate-images]\n";
        return 1;
    }
    const std::string path = argv[1];
    try {
        const auto folder = std::filesystem::path(path).parent_path();
        if (!folder.empty())
            std::filesystem::create_directories(folder);
        longrun::cli::write_summary_html(longrun::test::sample_summary_report(), path);
        if (argc == 3) {
            std::string html;
            {
                std::ifstream in(path, std::ios::binary);
                html.assign(std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>());
            }
            const std::string marker = "data:image/png;base64,";
            int corrupted = 0;
            for (auto at = html.find(marker); at != std::string::npos;
                 at = html.find(marker, at + 1)) {
                const auto start = at + marker.size();
                if (damage == "--corrupt-images") {
                    html.replace(start, 24, std::string(24, 'A'));
                } else {
                    const auto end = html.find('"', start);
                    // Half the payload, on a 4-character boundary: still valid base64.
                    html.erase(start + (end - start) / 8 * 4, end - start - (end - start) / 8 * 4);
                }
                ++corrupted;
            }
            std::ofstream(path, std::ios::binary) << html;
            std::cout << "damaged " << corrupted << " images\n";
        }
    } catch (const std::exception& e) {
        std::cerr << path << ": " << e.what() << "\n";
        return 6;
    }
    std::cout << "wrote " << path << "\n";
    return 0;
}
