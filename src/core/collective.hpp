// Collective error handling: work that only rank 0 can do (read a file, check a
// campaign) whose failure every rank must see, so all of them leave together
// with the same typed error instead of hanging in the next collective.
#pragma once
#include <mpi.h>

#include <exception>
#include <string>

#include "core/errors.hpp"

namespace spinflip::core {

namespace detail {
enum class Outcome : int { ok = 0, config, input, io, model, internal };
/// Broadcast rank 0's outcome; on every rank, throw the matching error if it failed.
void share_outcome(MPI_Comm comm, Outcome outcome, std::string message);
}  // namespace detail

/// Rank 0 of `comm` runs `f`; an error it throws is rethrown on every rank with the
/// same class (ConfigError, InputError, IoError, ModelError; anything else as
/// InternalError). Collective on `comm`.
template <class F>
void run_on_root(MPI_Comm comm, F&& f) {
  using detail::Outcome;
  Outcome outcome = Outcome::ok;
  std::string message;
  int rank = 0;
  SPINFLIP_CHECK_MPI(MPI_Comm_rank(comm, &rank));
  if (rank == 0) {
    try {
      f();
    } catch (const ConfigError& e) {
      outcome = Outcome::config, message = e.what();
    } catch (const InputError& e) {
      outcome = Outcome::input, message = e.what();
    } catch (const IoError& e) {
      outcome = Outcome::io, message = e.what();
    } catch (const ModelError& e) {
      outcome = Outcome::model, message = e.what();
    } catch (const std::exception& e) {
      outcome = Outcome::internal, message = e.what();
    }
  }
  detail::share_outcome(comm, outcome, std::move(message));
}

}  // namespace spinflip::core
