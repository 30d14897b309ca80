// libFuzzer target: the ingest manifest CSV (file, parameters, realisation,
// role) on arbitrary bytes, against a two-parameter campaign.
#include "fuzz_contract.hpp"
#include "ingest/ingest.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string path = spinflip::fuzz::as_file(data, size, ".csv");
  spinflip::fuzz::expect_clean_refusal([&] {
    const auto m = spinflip::ingest::read_manifest(path, {"ionizing_efficiency", "min_virial_temperature_K"}, {});
    (void)spinflip::ingest::points_of(m);
  });
  return 0;
}
