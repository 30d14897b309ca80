// The contract every fuzz target checks (issue 19): whatever the bytes, the
// reader either accepts them or refuses with a typed user error (exit status 2)
// whose message is one line. An internal error, an untyped exception, a
// crash, a sanitizer report or a hang is a finding: abort() hands the input to
// libFuzzer, which saves it as crash-<sha1> for tests/fuzz/corpus/.
#pragma once
#include <unistd.h>

#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <new>
#include <string>
#include <string_view>

#include "core/errors.hpp"

namespace spinflip::fuzz {

[[noreturn]] inline void finding(const char* what, const char* message) {
  std::fprintf(stderr, "fuzz finding: %s: %s\n", what, message);
  std::abort();
}

template <class F>
void expect_clean_refusal(F&& read) {
  try {
    read();
  } catch (const Error& e) {
    if (e.exit_status() != 2) finding("bad input gave an internal error (exit 1), not a user error", e.what());
    if (std::string_view(e.what()).find('\n') != std::string_view::npos) finding("a message of several lines", e.what());
  } catch (const std::bad_alloc&) {
    finding("bad input made the reader allocate without bound", "std::bad_alloc");
  } catch (const std::exception& e) {
    finding("an untyped exception escaped (main would call it an internal error)", e.what());
  }
}

/// The bytes as a file the path-based readers can open (one per process, so
/// parallel fuzzing jobs do not share it).
inline std::string as_file(const std::uint8_t* data, std::size_t size, const char* extension) {
  const std::string path = "/tmp/spinflip-fuzz-" + std::to_string(::getpid()) + extension;
  std::ofstream out(path, std::ios::binary | std::ios::trunc);
  out.write(reinterpret_cast<const char*>(data), static_cast<std::streamsize>(size));
  return path;
}

}  // namespace spinflip::fuzz
