// Typed errors, caught once in main(). User errors exit 2, internal errors 1.
#pragma once
#include <source_location>
#include <stdexcept>
#include <string>

namespace spinflip {

/// Base of every spinflip error. exit_status() is what main() returns.
class Error : public std::runtime_error {
 public:
  explicit Error(const std::string& message, int exit_status = 1)
      : std::runtime_error(message), exit_status_(exit_status) {}
  int exit_status() const noexcept { return exit_status_; }

 private:
  int exit_status_;
};

/// A campaign or stats file is wrong: unknown key, wrong type, out of range.
class ConfigError : public Error {
 public:
  explicit ConfigError(const std::string& m) : Error(m, 2) {}
};

/// A user's input data is wrong: unreadable array, NaN, wrong shape.
class InputError : public Error {
 public:
  explicit InputError(const std::string& m) : Error(m, 2) {}
};

/// The file system refused: unwritable path, full disk, locked catalogue.
class IoError : public Error {
 public:
  explicit IoError(const std::string& m) : Error(m, 2) {}
};

/// A model was asked for something outside its range (entry-level failure).
class ModelError : public Error {
 public:
  explicit ModelError(const std::string& m) : Error(m, 2) {}
};

/// A bug or a library failure that the user could not have caused.
class InternalError : public Error {
 public:
  explicit InternalError(const std::string& m) : Error(m, 1) {}
};

/// "file.cpp:123" of a call site, for library-failure messages.
std::string where(const std::source_location& loc);

/// Throw InternalError naming the failed MPI call and its decoded error string.
void check_mpi(int code, const char* expression,
               const std::source_location& loc = std::source_location::current());

}  // namespace spinflip

#define SPINFLIP_CHECK_MPI(expr) ::spinflip::check_mpi((expr), #expr)
