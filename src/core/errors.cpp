#include "core/errors.hpp"
#include "core/printable.hpp"

#include <mpi.h>

#include <filesystem>

namespace spinflip {

std::string printable(std::string_view text, std::size_t max) {
  std::string out;
  for (const char ch : text) {
    if (out.size() >= max) return out + "…";
    const auto c = static_cast<unsigned char>(ch);
    if (c >= 0x20 && c < 0x7f) {
      out += ch;
    } else {
      static const char hex[] = "0123456789abcdef";
      out += "\\x";
      out += hex[c >> 4];
      out += hex[c & 15];
    }
  }
  return out;
}

std::string where(const std::source_location& loc) {
  return std::filesystem::path(loc.file_name()).filename().string() + ":" + std::to_string(loc.line());
}

void check_mpi(int code, const char* expression, const std::source_location& loc) {
  if (code == MPI_SUCCESS) return;
  char text[MPI_MAX_ERROR_STRING];
  int length = 0;
  MPI_Error_string(code, text, &length);
  throw InternalError(std::string("MPI call failed: ") + expression + " (" + std::string(text, length) +
                      ") at " + where(loc));
}

}  // namespace spinflip
