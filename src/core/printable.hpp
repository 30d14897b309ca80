// Quoting a user's bytes in a one-line error message.
#pragma once
#include <cstddef>
#include <string>
#include <string_view>

namespace spinflip {

/// A value read from a user's file, fit to quote in a one-line message:
/// control bytes and bytes outside printable ASCII written as \xNN, and cut
/// to `max` characters with "…".
std::string printable(std::string_view text, std::size_t max = 60);

}  // namespace spinflip
