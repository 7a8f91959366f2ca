// The summary's plots and its self-contained HTML report, from a summary built
// by hand from closed forms (sample_summary.hpp): files in both formats with a
// line for every series, a page that carries every measure, the caution and its
// pictures, user text escaped, and nothing left behind when writing fails.
#include "cli/base64.hpp"
#include "cli/summary_html.hpp"
#include "cli/summary_plots.hpp"
#include "io/error.hpp"
#include "sample_summary.hpp"

#include <fmt/format.h>
#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <iterator>
#include <regex>
#include <set>
#include <unistd.h>

namespace longrun {
namespace {

namespace fs = std::filesystem;

std::string read_bytes(const fs::path& p) {
    std::ifstream in(p, std::ios::binary);
    return {std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>()};
}

std::size_t count(const std::string& text, const std::string& what) {
    std::size_t n = 0;
    for (auto at = text.find(what); at != std::string::npos; at = text.find(what, at + 1))
        ++n;
    return n;
}

// The 8-byte PNG signature (PNG specification, sec. 5.2).
const std::string png_signature("\x89PNG\r\n\x1a\n", 8);

// Width and height from the IHDR chunk, which must come first (PNG specification,
// sec. 5.6 and 11.2.2): big-endian at bytes 16..23.
std::pair<unsigned, unsigned> png_size(const std::string& png) {
    auto word = [&](std::size_t at) {
        unsigned v = 0;
        for (std::size_t k = 0; k < 4; ++k)
            v = v << 8 | static_cast<unsigned char>(png.at(at + k));
        return v;
    };
    return {word(16), word(20)};
}

// The colours of the drawn shapes (polyline, polygon, path) other than the axes'
// black and the background's white: one per series at least.
std::set<std::string> series_colours(const std::string& svg) {
    static const std::regex shape(R"re(<(polyline|polygon|path)\b[^>]*>)re");
    static const std::regex colour(R"re((stroke|fill)="(#[0-9A-Fa-f]{6})")re");
    std::set<std::string> colours;
    for (auto s = std::sregex_iterator(svg.begin(), svg.end(), shape); s != std::sregex_iterator();
         ++s) {
        const std::string element = s->str();
        for (auto c = std::sregex_iterator(element.begin(), element.end(), colour);
             c != std::sregex_iterator(); ++c) {
            std::string value = (*c)[2];
            for (auto& ch : value)
                ch = static_cast<char>(std::toupper(static_cast<unsigned char>(ch)));
            if (value != "#000000" && value != "#FFFFFF")
                colours.insert(value);
        }
    }
    return colours;
}

// The text of an SVG as a reader sees it: PLplot's SVG driver writes each
// character as a numeric reference (&#x39; for '9'), inside <tspan> elements.
std::string svg_text(const std::string& svg) {
    static const std::regex tspan(R"re(<tspan[^>]*>([^<]*)</tspan>)re");
    static const std::regex reference(R"re(&#x([0-9A-Fa-f]+);)re");
    std::string text;
    for (auto t = std::sregex_iterator(svg.begin(), svg.end(), tspan); t != std::sregex_iterator();
         ++t) {
        const std::string raw = (*t)[1];
        std::size_t last = 0;
        for (auto r = std::sregex_iterator(raw.begin(), raw.end(), reference);
             r != std::sregex_iterator(); ++r) {
            text += raw.substr(last, r->position() - last);
            const unsigned long code = std::stoul((*r)[1], nullptr, 16);
            text += code < 128 ? static_cast<char>(code) : '?';
            last = r->position() + r->length();
        }
        text += raw.substr(last) + "\n";
    }
    return text;
}

class SummaryReportTest : public ::testing::Test {
  protected:
    void SetUp() override {
        folder = fs::temp_directory_path() /
                 ("longrun-summary-report-" + std::to_string(::getpid()) + "-" +
                  ::testing::UnitTest::GetInstance()->current_test_info()->name());
        fs::remove_all(folder);
        fs::create_directories(folder);
    }
    void TearDown() override {
        std::error_code ignored;
        fs::permissions(folder, fs::perms::owner_all, fs::perm_options::add, ignored);
        fs::remove_all(folder, ignored);
    }
    std::vector<std::string> listing() const {
        std::vector<std::string> names;
        for (const auto& e : fs::directory_iterator(folder))
            names.push_back(e.path().filename().string());
        return names;
    }
    fs::path folder;
    const cli::SummaryReport report = test::sample_summary_report();
};

// RFC 4648, section 10 (test vectors).
TEST(Base64, RfcTestVectors) {
    EXPECT_EQ(cli::base64_encode(""), "");
    EXPECT_EQ(cli::base64_encode("f"), "Zg==");
    EXPECT_EQ(cli::base64_encode("fo"), "Zm8=");
    EXPECT_EQ(cli::base64_encode("foo"), "Zm9v");
    EXPECT_EQ(cli::base64_encode("foob"), "Zm9vYg==");
    EXPECT_EQ(cli::base64_encode("fooba"), "Zm9vYmE=");
    EXPECT_EQ(cli::base64_encode("foobar"), "Zm9vYmFy");
    // Bytes above 0x7f, where a signed char would go wrong.
    EXPECT_EQ(cli::base64_encode(std::string("\xff\xfe\x80", 3)), "//6A");
}

TEST_F(SummaryReportTest, PlotsInBothFormatsWithEverySeries) {
    const std::string prefix = (folder / "ward").string();
    const auto written = cli::write_summary_plots(report, prefix);
    // Names made safe for a file system; the measure called "residuals" must not
    // take the residual history's name.
    const std::vector<std::string> stems{"in_system", "waiting_____room", "all_busy", "residuals-2",
                                         "residuals"};
    std::vector<std::string> expected;
    for (const auto& s : stems)
        for (const char* ext : {".png", ".svg"})
            expected.push_back(prefix + "-" + s + ext);
    EXPECT_EQ(written, expected);
    EXPECT_EQ(listing().size(), expected.size()) << "temporary files left behind?";

    for (const auto& s : stems) {
        const std::string png = read_bytes(prefix + "-" + s + ".png");
        ASSERT_GT(png.size(), 1000u) << s;
        EXPECT_EQ(png.substr(0, 8), png_signature) << s;
        const auto [width, height] = png_size(png);
        EXPECT_EQ(width, 1000u) << s;
        EXPECT_GE(height, 700u) << s;

        const std::string svg = read_bytes(prefix + "-" + s + ".svg");
        EXPECT_NE(svg.find("<svg"), std::string::npos) << s;
        EXPECT_NE(svg.find("</svg>"), std::string::npos) << s;
        // Distribution figures: bars, the tail line, the quantile markers.
        // Residual history: two attempts and the tolerance line.
        EXPECT_GE(series_colours(svg).size(), 3u) << s;
    }
    // The quantile labels are in the SVG as text. M/M/4/40 at a = 3.5 from the
    // closed form (Gross & Harris), computed outside the project with numpy:
    // np.searchsorted(np.cumsum(p), level) gives 6, 18, 33, 39.
    const std::string labels = svg_text(read_bytes(prefix + "-in_system.svg"));
    for (const char* label : {"50% = 6", "90% = 18", "99% = 33", "99.9% = 39"})
        EXPECT_NE(labels.find(std::string(label) + "\n"), std::string::npos) << label << labels;
}

TEST_F(SummaryReportTest, FigureInMemoryIsAPng) {
    const auto figures = cli::summary_figures(report);
    ASSERT_EQ(figures.size(), 5u);
    const std::string png = cli::render_png(figures.back());
    EXPECT_EQ(png.substr(0, 8), png_signature);
    EXPECT_EQ(png_size(png), std::make_pair(1000u, 700u));
}

TEST_F(SummaryReportTest, HtmlCarriesEverythingEscaped) {
    const fs::path path = folder / "report.html";
    cli::write_summary_html(report, path.string());
    EXPECT_EQ(listing(), std::vector<std::string>{"report.html"});
    const std::string html = read_bytes(path);

    EXPECT_EQ(html.rfind("<!DOCTYPE html>", 0), 0u);
    EXPECT_NE(html.find(cli::html_escape(cli::safety_caution)), std::string::npos);
    EXPECT_NE(html.find("class=\"caution\""), std::string::npos);
    for (const auto& m : report.summary.measures)
        EXPECT_NE(html.find("<td>" + cli::html_escape(m.name) + "</td>"), std::string::npos)
            << m.name;
    EXPECT_NE(html.find("<td>waiting &lt;&amp;&gt; room</td>"), std::string::npos);

    // The model text, escaped: it shows as written and runs nothing.
    EXPECT_NE(html.find("name: ward &lt;&amp;&gt; annex"), std::string::npos);
    EXPECT_NE(html.find("&lt;script&gt;alert(&#39;not run&#39;)&lt;/script&gt;"),
              std::string::npos);
    EXPECT_EQ(html.find("ward <&> annex"), std::string::npos);
    EXPECT_EQ(html.find("<script"), std::string::npos);

    // Certificate, tables, units.
    EXPECT_NE(html.find("3.000e-13 &le; tolerance 1.000e-10"), std::string::npos);
    EXPECT_NE(html.find("per unit time"), std::string::npos);
    // Closed-form values computed with numpy (see above): the 99.9% quantile 39,
    // the mean 8.456411158143533 and the loss rate lambda P(full) (PASTA)
    // 0.0026517941631025318, as the report prints them (6 significant digits).
    EXPECT_NE(html.find("99.9%: 39"), std::string::npos);
    EXPECT_NE(html.find("<td class=\"num\">8.45641</td>"), std::string::npos);
    EXPECT_NE(html.find("<td class=\"num\">0.00265179</td>"), std::string::npos);
    for (const char* section : {"chain", "model", "certificate", "measures", "probabilities",
                                "events", "likely-states", "warnings", "plots"})
        EXPECT_NE(html.find(fmt::format("<section id=\"{}\">", section)), std::string::npos)
            << section;
    EXPECT_NE(html.find("mass at the upper bound 40 is above 1e-06 &lt;check&gt;"),
              std::string::npos);

    // Five pictures, all inside the file, each a PNG: "iVBORw0KGgo" is the base64
    // (RFC 4648) of the PNG signature.
    const std::string data_uri = "src=\"data:image/png;base64,";
    EXPECT_EQ(count(html, data_uri), 5u);
    EXPECT_EQ(count(html, data_uri + "iVBORw0KGgo"), 5u);
    EXPECT_EQ(count(html, "<img "), 5u);
    EXPECT_EQ(html.find("http://"), std::string::npos);
    EXPECT_EQ(html.find("https://"), std::string::npos);
}

// Root may write anywhere, so the writer runs in a child that has given up root
// (as "nobody") where the test runs as root; otherwise the folder is made read-only.
TEST_F(SummaryReportTest, UnwritableFolderThrowsOutputErrorAndLeavesNothing) {
    const fs::path locked = folder / "locked";
    fs::create_directories(locked);
    fs::permissions(locked, fs::perms::owner_read | fs::perms::owner_exec | fs::perms::group_read |
                                fs::perms::group_exec | fs::perms::others_read |
                                fs::perms::others_exec);
    fs::permissions(folder, fs::perms::others_exec | fs::perms::others_read, fs::perm_options::add);
    const std::string target = (locked / "report.html").string();
    EXPECT_EXIT(
        {
            if (::geteuid() == 0 && (::setgid(65534) != 0 || ::setuid(65534) != 0))
                std::_Exit(3);
            try {
                cli::write_summary_html(report, target);
            } catch (const OutputError&) {
                std::_Exit(0);
            } catch (...) {
                std::_Exit(2);
            }
            std::_Exit(1);
        },
        ::testing::ExitedWithCode(0), "");
    EXPECT_TRUE(fs::is_empty(locked));

    // Plots into a folder that does not exist.
    EXPECT_THROW(cli::write_summary_plots(report, (folder / "absent" / "ward").string()),
                 OutputError);
}

// The final name taken by a folder: the rename fails after the page was written,
// and the temporary file must go.
TEST_F(SummaryReportTest, FailedRenameLeavesNoTemporaryFile) {
    fs::create_directories(folder / "report.html" / "occupied");
    EXPECT_THROW(cli::write_summary_html(report, (folder / "report.html").string()), OutputError);
    EXPECT_EQ(listing(), std::vector<std::string>{"report.html"});
    EXPECT_TRUE(fs::is_directory(folder / "report.html"));
}

} // namespace
} // namespace longrun
