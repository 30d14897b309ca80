// libFuzzer target: the .npy reader (stats/npy.hpp) on arbitrary bytes.
#include "fuzz_contract.hpp"
#include "stats/npy.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string path = spinflip::fuzz::as_file(data, size, ".npy");
  spinflip::fuzz::expect_clean_refusal([&] { (void)spinflip::stats::read_npy(path); });
  return 0;
}
