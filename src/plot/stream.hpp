// One PLplot output stream as an object. PLplot keeps a process-wide "current
// stream"; every drawing call goes to it. A Stream makes its own stream current
// for as long as it lives and hands the previous one back when it ends, so that
// plots can be made one after another (or nested) in one process.
//
// PLplot reports argument errors through a global abort handler and carries on;
// Stream collects those messages and finish() turns them into an OutputError.
// PLplot ends the process on a file it cannot open, so Stream opens the file
// itself first and fails with an ordinary exception instead.
#pragma once

#include <string>

namespace longrun::plot {

enum class Format { png, svg };

const char* extension(Format format); // ".png", ".svg"

class Stream {
  public:
    // Opens `file` for writing with the driver for `format`, `width` x `height`
    // pixels (PNG) or points (SVG). Throws OutputError.
    Stream(const std::string& file, Format format, int width, int height);
    Stream(const Stream&) = delete;
    Stream& operator=(const Stream&) = delete;
    ~Stream();

    // Flushes and closes the file. Throws OutputError if PLplot reported an error
    // while drawing. The destructor closes without checking.
    void finish();

  private:
    std::string file_;
    int id_ = -1;
    int previous_ = 0;
    bool open_ = false;
};

} // namespace longrun::plot
