#include "core/output_file.hpp"

#include <unistd.h>

#include <cerrno>
#include <cstdio>
#include <cstring>
#include <system_error>

#include "core/errors.hpp"

namespace spinflip::core {

namespace fs = std::filesystem;

void check_output_folder(const fs::path& target, const std::string& what) {
  const fs::path dir = target.parent_path().empty() ? fs::path(".") : target.parent_path();
  std::error_code ec;
  if (target.empty()) throw IoError(what + " is empty: give a file path");
  if (fs::is_directory(target, ec))
    throw IoError(what + " " + target.string() + " is a folder: give a file path");
  if (!fs::is_directory(dir, ec))
    throw IoError(what + " " + target.string() + ": folder " + dir.string() + " does not exist");
  if (::access(dir.c_str(), W_OK) != 0)
    throw IoError(what + " " + target.string() + ": folder " + dir.string() + " is not writable");
}

OutputFile::OutputFile(fs::path target, std::string what)
    : target_(std::move(target)), partial_(target_.string() + ".partial"), what_(std::move(what)) {
  check_output_folder(target_, what_);
  std::error_code ec;
  fs::remove(partial_, ec);  // left by a run killed before (kill -9 skips destructors)
}

void OutputFile::commit() {
  std::error_code ec;
  if (!fs::exists(partial_, ec))
    throw InternalError("output " + partial_.string() + " was not written before commit");
  fs::rename(partial_, target_, ec);
  if (ec) throw IoError("cannot rename " + partial_.string() + " to " + target_.string() + ": " + ec.message());
  committed_ = true;
}

OutputFile::~OutputFile() {
  if (committed_) return;
  std::error_code ec;
  fs::remove(partial_, ec);
}

void OutputFile::write_and_commit(std::string_view bytes) {
  std::FILE* f = std::fopen(partial_.c_str(), "wb");
  if (!f) throw IoError(what_ + " " + target_.string() + ": cannot create " + partial_.string() + ": " + std::strerror(errno));
  errno = 0;
  const std::size_t n = std::fwrite(bytes.data(), 1, bytes.size(), f);
  int error = n != bytes.size() ? errno : 0;
  if (std::fflush(f) != 0 && error == 0) error = errno;
  if (std::fclose(f) != 0 && error == 0) error = errno;
  if (n != bytes.size() || error != 0)
    throw IoError(what_ + " " + target_.string() + ": writing failed (" + std::strerror(error ? error : EIO) +
                  "; a full disk?); the previous file, if any, is kept");
  commit();
}

void write_text_file(const fs::path& target, const std::string& text, const std::string& what) {
  OutputFile out(target, what);
  out.write_and_commit(text);
}

}  // namespace spinflip::core
