#include "stream.hpp"

#include "io/error.hpp"

#include <plplot.h>

#include <cerrno>
#include <cstdio>
#include <cstring>

namespace longrun::plot {

namespace {

// PLplot has one abort handler per process, not per stream: the messages of
// whichever stream is drawing land here, and each Stream clears it on opening.
std::string& reported_errors() {
    static std::string messages;
    return messages;
}

void collect_error(PLCHAR_VECTOR message) {
    auto& all = reported_errors();
    all += (all.empty() ? "" : "; ") + std::string(message ? message : "unknown PLplot error");
}

const char* device(Format format) {
    // svg: PLplot's own SVG 1.1 driver writes lines as <polyline> and text as
    // <text>, which other tools can read back; pngcairo antialiases.
    return format == Format::png ? "pngcairo" : "svg";
}

} // namespace

const char* extension(Format format) {
    return format == Format::png ? ".png" : ".svg";
}

Stream::Stream(const std::string& file, Format format, int width, int height) : file_(file) {
    // PLplot calls exit() when it cannot open its output: find out first.
    if (std::FILE* probe = std::fopen(file.c_str(), "wb"))
        std::fclose(probe);
    else
        throw OutputError(file + ": cannot create: " + std::strerror(errno));
    PLINT previous = 0, id = 0;
    plgstrm(&previous);
    plmkstrm(&id);
    if (id < 0)
        throw OutputError(file + ": PLplot has no free output stream");
    previous_ = previous;
    id_ = id;
    reported_errors().clear();
    plsabort(collect_error);
    plsdev(device(format));
    plsfnam(file.c_str());
    plspage(0, 0, width, height, 0, 0);
    // cmap0 index 0 is the background: white, so that the picture prints.
    plscolbg(255, 255, 255);
    plinit();
    open_ = true;
}

void Stream::finish() {
    if (!open_)
        return;
    plsstrm(id_);
    plend1();
    open_ = false;
    plsstrm(previous_);
    plsabort(nullptr);
    if (!reported_errors().empty())
        throw OutputError(file_ + ": plotting failed: " + reported_errors());
}

Stream::~Stream() {
    if (!open_)
        return;
    plsstrm(id_);
    plend1();
    plsstrm(previous_);
    plsabort(nullptr);
}

} // namespace longrun::plot
