#include "core/checksum.hpp"

#include <openssl/evp.h>

#include <fstream>
#include <memory>
#include <vector>

#include "core/errors.hpp"

namespace spinflip::core {
namespace {
struct DigestContext {
  std::unique_ptr<EVP_MD_CTX, decltype(&EVP_MD_CTX_free)> ctx{EVP_MD_CTX_new(), &EVP_MD_CTX_free};
  DigestContext() {
    if (!ctx || EVP_DigestInit_ex(ctx.get(), EVP_sha256(), nullptr) != 1)
      throw InternalError("OpenSSL SHA-256 initialisation failed");
  }
  void update(const void* data, std::size_t size) {
    if (EVP_DigestUpdate(ctx.get(), data, size) != 1) throw InternalError("OpenSSL SHA-256 update failed");
  }
  std::string hex() {
    unsigned char digest[EVP_MAX_MD_SIZE];
    unsigned int length = 0;
    if (EVP_DigestFinal_ex(ctx.get(), digest, &length) != 1) throw InternalError("OpenSSL SHA-256 final failed");
    static const char* digits = "0123456789abcdef";
    std::string out;
    for (unsigned int i = 0; i < length; ++i) {
      out += digits[digest[i] >> 4];
      out += digits[digest[i] & 15];
    }
    return out;
  }
};
}  // namespace

std::string sha256_hex(const void* data, std::size_t size) {
  DigestContext d;
  d.update(data, size);
  return d.hex();
}

std::string sha256_hex(std::string_view bytes) { return sha256_hex(bytes.data(), bytes.size()); }

std::string sha256_file(const std::filesystem::path& file) {
  std::ifstream in(file, std::ios::binary);
  if (!in) throw IoError(file.string() + ": cannot open the file to checksum it");
  DigestContext d;
  std::vector<char> buffer(1 << 20);
  while (in) {
    in.read(buffer.data(), static_cast<std::streamsize>(buffer.size()));
    d.update(buffer.data(), static_cast<std::size_t>(in.gcount()));
  }
  return d.hex();
}

}  // namespace spinflip::core
