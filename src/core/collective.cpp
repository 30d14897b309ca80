#include "core/collective.hpp"

namespace spinflip::core::detail {

void share_outcome(MPI_Comm comm, Outcome outcome, std::string message) {
  long long header[2] = {static_cast<long long>(outcome), static_cast<long long>(message.size())};
  SPINFLIP_CHECK_MPI(MPI_Bcast(header, 2, MPI_LONG_LONG, 0, comm));
  if (header[0] == static_cast<long long>(Outcome::ok)) return;
  message.resize(static_cast<std::size_t>(header[1]));
  SPINFLIP_CHECK_MPI(MPI_Bcast(message.data(), static_cast<int>(header[1]), MPI_CHAR, 0, comm));
  switch (static_cast<Outcome>(header[0])) {
    case Outcome::config: throw ConfigError(message);
    case Outcome::input: throw InputError(message);
    case Outcome::io: throw IoError(message);
    case Outcome::model: throw ModelError(message);
    default: throw InternalError(message);
  }
}

}  // namespace spinflip::core::detail
