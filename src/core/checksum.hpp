// SHA-256 of text or bytes (OpenSSL), for campaign identity and file provenance.
#pragma once
#include <cstddef>
#include <filesystem>
#include <string>
#include <string_view>

namespace spinflip::core {

std::string sha256_hex(std::string_view bytes);
std::string sha256_hex(const void* data, std::size_t size);
/// Streaming checksum of a whole file.
std::string sha256_file(const std::filesystem::path& file);

}  // namespace spinflip::core
