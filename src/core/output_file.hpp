// Kill-safe output files, the catalogue's pattern for every verb: the file is
// written beside its target as `<target>.partial` and renamed over the target
// only once it is whole. A failure (an exception, an early return) removes the
// partial file; a previous output at the target is untouched until the rename.
#pragma once
#include <filesystem>
#include <string>
#include <string_view>

namespace spinflip::core {

class OutputFile {
 public:
  /// `what` names the option in messages ("-o", "--preview"). IoError if the
  /// target's folder does not exist, is not writable, or the target is a folder.
  explicit OutputFile(std::filesystem::path target, std::string what = "-o");
  /// The path to write now (`<target>.partial`).
  const std::filesystem::path& path() const { return partial_; }
  const std::filesystem::path& target() const { return target_; }
  /// Rename the finished file over the target (IoError if that fails).
  void commit();
  /// Write `bytes` as the whole file, checking that every byte reached the file
  /// system (a full disk is an IoError naming the target), then commit.
  void write_and_commit(std::string_view bytes);
  /// Not committed: the partial file is removed.
  ~OutputFile();

  OutputFile(const OutputFile&) = delete;
  OutputFile& operator=(const OutputFile&) = delete;

 private:
  std::filesystem::path target_, partial_;
  std::string what_;
  bool committed_ = false;
};

/// Write `text` to `target` through an OutputFile, checking every byte reached
/// the file system (a full disk is an IoError naming the file).
void write_text_file(const std::filesystem::path& target, const std::string& text, const std::string& what = "-o");

/// IoError unless the folder of `target` exists and is writable.
void check_output_folder(const std::filesystem::path& target, const std::string& what = "-o");

}  // namespace spinflip::core
