#include "core/errors.hpp"

#include <mpi.h>

#include <filesystem>

namespace spinflip {

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
